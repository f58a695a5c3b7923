"""Multi-asset catalogue: every shipped product passes its declared checks, every declared
reduction and relation catches a realistic bug, and the correlated model behind them
rejects bad correlations and reproduces the correlation it is given."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import norm

from limitcase import BlackScholes, ModelError, MultiBlackScholes, NoReference, ParamError, checks_for
from limitcase.testing import assert_all_pass, assert_caught, assert_every_check_has_a_twin
from limitcase_payoffs.multi_asset import (
    AssetCall,
    AssetPut,
    BasketCall,
    BasketPut,
    BestOfCall,
    ExchangeOption,
    SpreadCall,
    WorstOfCall,
    at_expiry,
    combined_asset,
    correlated_market,
    marginal,
    weighted_by_decay,
)

PATHS = 20_000
SHIPPED = [AssetCall, AssetPut, BasketCall, BasketPut, ExchangeOption, SpreadCall, BestOfCall, WorstOfCall]


@pytest.mark.parametrize("cls", SHIPPED, ids=lambda c: c.__name__)
def test_shipped_product_passes_every_check(cls):
    assert_all_pass(cls, paths=PATHS)


@pytest.mark.parametrize("cls", SHIPPED, ids=lambda c: c.__name__)
def test_each_family_declares_two_reductions_or_more(cls):
    limits = [c for c in checks_for(cls) if c.kind == "reduction"]
    assert len(limits) >= (1 if cls in (AssetCall, AssetPut) else 2)
    assert all(c.error is None for c in checks_for(cls))


# ---------------------------------------------------------------------------------------
# broken twins: each a plausible bug, each seen by the named check


class CallOnWrongAsset(AssetCall):
    def payoff(self, obs):  # always reads asset 0, whatever `asset` says
        return np.maximum(at_expiry(obs)[:, 0] - self.strike, 0.0)


class CallWrittenAsPut(AssetCall):
    def payoff(self, obs):
        return np.maximum(self.strike - at_expiry(obs)[:, self.asset], 0.0)


class CallWithContractMultiplier(AssetCall):
    def payoff(self, obs):  # a multiplier of 100 shares applied inside the payoff
        return 100.0 * np.maximum(at_expiry(obs)[:, self.asset] - self.strike, 0.0)


class PutOnWrongAsset(AssetPut):
    def payoff(self, obs):
        return np.maximum(self.strike - at_expiry(obs)[:, 0], 0.0)


class PutWrittenAsCall(AssetPut):
    def payoff(self, obs):
        return np.maximum(at_expiry(obs)[:, self.asset] - self.strike, 0.0)


class PutWithContractMultiplier(AssetPut):
    def payoff(self, obs):
        return 100.0 * np.maximum(self.strike - at_expiry(obs)[:, self.asset], 0.0)


class WeightsAppliedTwice:
    def basket(self, obs):  # the weights multiply the prices and then the sum again
        return at_expiry(obs) @ (self.weights * self.weights)


class WeightsReversed:
    def basket(self, obs):  # weights listed from the last asset to the first
        return at_expiry(obs) @ self.weights[::-1]


class SumNotAverage:
    def basket(self, obs):  # forgets to normalise: the sum of decay**i S_i
        return at_expiry(obs) @ (self.decay ** np.arange(self.assets))


class BasketCallWeightsTwice(WeightsAppliedTwice, BasketCall): ...


class BasketCallWeightsReversed(WeightsReversed, BasketCall): ...


class BasketCallOnSum(SumNotAverage, BasketCall): ...


class BasketCallAsPut(BasketCall):
    def payoff(self, obs):
        return np.maximum(self.strike - self.basket(obs), 0.0)


class BasketCallCapped(BasketCall):
    def payoff(self, obs):  # a cap of 15 left in from a call-spread template
        return np.clip(self.basket(obs) - self.strike, 0.0, 15.0)


class BasketPutWeightsTwice(WeightsAppliedTwice, BasketPut): ...


class BasketPutWeightsReversed(WeightsReversed, BasketPut): ...


class BasketPutAsCall(BasketPut):
    def payoff(self, obs):
        return np.maximum(self.basket(obs) - self.strike, 0.0)


class BasketPutCapped(BasketPut):
    def payoff(self, obs):
        return np.clip(self.strike - self.basket(obs), 0.0, 15.0)


class BasketPutWithMultiplier(BasketPut):
    def payoff(self, obs):
        return 100.0 * np.maximum(self.strike - self.basket(obs), 0.0)


class ExchangeSwapped(ExchangeOption):
    def payoff(self, obs):  # gives asset 1 to receive asset 2
        s = at_expiry(obs)
        return np.maximum(s[:, 1] - s[:, 0], 0.0)


class ExchangeWithMultiplier(ExchangeOption):
    def payoff(self, obs):
        s = at_expiry(obs)
        return 100.0 * np.maximum(s[:, 0] - s[:, 1], 0.0)


class ExchangeOfPerformances(ExchangeOption):
    def payoff(self, obs):  # exchanges S_i(T) / S_i(0) instead of the assets themselves
        s = at_expiry(obs) / obs.s0
        return np.maximum(s[:, 0] - s[:, 1], 0.0)


class SpreadSwapped(SpreadCall):
    def payoff(self, obs):
        s = at_expiry(obs)
        return np.maximum(s[:, 1] - s[:, 0] - self.strike, 0.0)


class SpreadIgnoringStrike(SpreadCall):
    def payoff(self, obs):
        s = at_expiry(obs)
        return np.maximum(s[:, 0] - s[:, 1], 0.0)


class SpreadAddingStrike(SpreadCall):
    def payoff(self, obs):
        s = at_expiry(obs)
        return np.maximum(s[:, 0] - s[:, 1] + self.strike, 0.0)


class SpreadCapped(SpreadCall):
    def payoff(self, obs):
        s = at_expiry(obs)
        return np.clip(s[:, 0] - s[:, 1] - self.strike, 0.0, 10.0)


class BestOfAsPut(BestOfCall):
    def payoff(self, obs):
        return np.maximum(self.strike - at_expiry(obs).max(axis=1), 0.0)


class BestOfAverage(BestOfCall):
    def payoff(self, obs):  # averages the assets instead of taking the best
        return np.maximum(at_expiry(obs).mean(axis=1) - self.strike, 0.0)


class BestOfUsingMin(BestOfCall):
    def payoff(self, obs):
        return np.maximum(at_expiry(obs).min(axis=1) - self.strike, 0.0)


class BestOfDroppingLastAsset(BestOfCall):
    def payoff(self, obs):  # off by one: the last asset never counts
        return np.maximum(at_expiry(obs)[:, :-1].max(axis=1) - self.strike, 0.0)


class BestOfAddingStrike(BestOfCall):
    def payoff(self, obs):
        return np.maximum(at_expiry(obs).max(axis=1) + self.strike - 200.0, 0.0)


class WorstOfAsPut(WorstOfCall):
    def payoff(self, obs):
        return np.maximum(self.strike - at_expiry(obs).min(axis=1), 0.0)


class WorstOfAverage(WorstOfCall):
    def payoff(self, obs):
        return np.maximum(at_expiry(obs).mean(axis=1) - self.strike, 0.0)


class WorstOfUsingMax(WorstOfCall):
    def payoff(self, obs):
        return np.maximum(at_expiry(obs).max(axis=1) - self.strike, 0.0)


class WorstOfDroppingLastAsset(WorstOfCall):
    def payoff(self, obs):
        return np.maximum(at_expiry(obs)[:, :-1].min(axis=1) - self.strike, 0.0)


class WorstOfAddingStrike(WorstOfCall):
    def payoff(self, obs):
        return np.maximum(at_expiry(obs).min(axis=1) + self.strike - 180.0, 0.0)


BROKEN = [
    (CallOnWrongAsset, "marginal_of_last_asset"),
    (CallWrittenAsPut, "decreasing_in_strike"),
    (CallWithContractMultiplier, "below_prepaid_forward"),
    (PutOnWrongAsset, "marginal_of_last_asset"),
    (PutWrittenAsCall, "increasing_in_strike"),
    (PutWithContractMultiplier, "below_discounted_strike"),
    (BasketCallOnSum, "gauss_hermite_quadrature"),
    (BasketCallAsPut, "one_asset"),
    (BasketCallWeightsReversed, "all_weight_on_first_asset"),
    (BasketCallWeightsTwice, "comonotone_assets"),
    (BasketCallAsPut, "decreasing_in_strike"),
    (BasketCallCapped, "convex_in_strike"),
    (BasketCallOnSum, "below_basket_forward"),
    (BasketCallWeightsTwice, "above_intrinsic"),
    (BasketPutWeightsTwice, "gauss_hermite_quadrature"),
    (BasketPutAsCall, "one_asset"),
    (BasketPutWeightsReversed, "all_weight_on_first_asset"),
    (BasketPutWeightsTwice, "comonotone_assets"),
    (BasketPutAsCall, "increasing_in_strike"),
    (BasketPutCapped, "convex_in_strike"),
    (BasketPutWithMultiplier, "below_discounted_strike"),
    (ExchangeSwapped, "margrabe_closed_form"),
    (ExchangeSwapped, "second_asset_riskless"),
    (ExchangeWithMultiplier, "below_prepaid_forward_1"),
    (ExchangeOfPerformances, "above_intrinsic"),
    (SpreadAddingStrike, "gauss_hermite_quadrature"),
    (SpreadSwapped, "zero_strike"),
    (SpreadIgnoringStrike, "second_asset_riskless"),
    (SpreadAddingStrike, "decreasing_in_strike"),
    (SpreadCapped, "convex_in_strike"),
    (SpreadAddingStrike, "below_exchange"),
    (BestOfDroppingLastAsset, "stulz_closed_form"),
    (BestOfAsPut, "one_asset"),
    (BestOfAverage, "comonotone_assets"),
    (BestOfUsingMin, "best_plus_worst"),
    (BestOfUsingMin, "above_call_on_first_asset"),
    (BestOfDroppingLastAsset, "above_call_on_last_asset"),
    (BestOfAddingStrike, "decreasing_in_strike"),
    (WorstOfDroppingLastAsset, "stulz_closed_form"),
    (WorstOfAsPut, "one_asset"),
    (WorstOfAverage, "comonotone_assets"),
    (WorstOfUsingMax, "best_plus_worst"),
    (WorstOfUsingMax, "below_call_on_first_asset"),
    (WorstOfDroppingLastAsset, "below_call_on_last_asset"),
    (WorstOfAddingStrike, "decreasing_in_strike"),
]


@pytest.mark.parametrize("broken, case", BROKEN, ids=[f"{b.__name__}-{c}" for b, c in BROKEN])
def test_broken_twin_is_caught(broken, case):
    assert_caught(broken, case, paths=PATHS)


def test_every_declared_check_has_a_broken_twin():
    assert_every_check_has_a_twin(SHIPPED, BROKEN)


# ---------------------------------------------------------------------------------------
# the pieces the checks rest on


def test_weights_are_geometric_and_sum_to_one():
    assert np.allclose(BasketCall().weights, [1 / 3, 1 / 3, 1 / 3])
    w = BasketCall(decay=0.5).weights
    assert np.allclose(w, np.array([4.0, 2.0, 1.0]) / 7.0)
    assert np.array_equal(BasketCall(decay=0.0).weights, [1.0, 0.0, 0.0])
    # the checks' own weighted sum agrees with the payoff's weights
    spots = np.array([100.0, 95.0, 105.0])
    assert math.isclose(weighted_by_decay(0.5, spots), float(w @ spots), rel_tol=1e-14)


def test_scenario_market_is_a_valid_correlated_market():
    m = correlated_market(5)
    assert m.n_assets == 5
    assert np.allclose(np.diag(m.correlation), 1.0)
    assert m.correlation[0, 2] == pytest.approx(0.25)
    assert np.linalg.eigvalsh(m.correlation).min() > 0
    assert correlated_market(7).spots[5] == correlated_market(7).spots[0]


def test_marginal_and_combined_asset_refuse_what_they_cannot_price():
    with pytest.raises(NoReference, match="MultiBlackScholes"):
        marginal(BlackScholes(), 0)
    mapping = combined_asset(lambda p, spots: spots.max())
    with pytest.raises(NoReference, match="correlation 1"):
        mapping(correlated_market(2), BestOfCall())
    with pytest.raises(NoReference, match="two-asset MultiBlackScholes"):
        ExchangeOption().reference(correlated_market(3))


def test_asset_index_is_validated():
    with pytest.raises(ParamError, match=r"asset=2 is outside \[0, 1\] for AssetCall with assets=2"):
        AssetCall(asset=2)


def test_best_plus_worst_names_its_two_asset_condition():
    errors = [c.error for c in checks_for(BestOfCall(assets=3)) if c.case == "best_plus_worst"]
    assert errors and "holds for two assets" in errors[0] and "assets=3" in errors[0]


@pytest.mark.published
def test_exchange_reference_reads_the_model_in_the_right_order():
    # E. G. Haug, The Complete Guide to Option Pricing Formulas, 2nd ed., 2007, exchange-one-
    # asset-for-another example (Margrabe 1978): S1=22, S2=20, T=0.1, r=0.1, b1=0.04,
    # b2=0.06, sigma1=0.2, sigma2=0.15, rho=-0.5: 2.1251 (from memory; recomputed by 2-D
    # quadrature in tests/references/test_exotics.py). q_i = r - b_i.
    model = MultiBlackScholes(spots=(22.0, 20.0), vols=(0.2, 0.15), dividends=(0.06, 0.04), correlation=-0.5, rate=0.1)
    assert ExchangeOption(maturity=0.1).reference(model) == pytest.approx(2.1251, abs=5e-5)


# ---------------------------------------------------------------------------------------
# the correlated model


@pytest.mark.parametrize(
    "correlation, message",
    [
        ([[1.0, 0.9, -0.9], [0.9, 1.0, 0.9], [-0.9, 0.9, 1.0]], "not positive semi-definite"),
        ([[1.0, 0.5, 0.0], [0.4, 1.0, 0.0], [0.0, 0.0, 1.0]], "not symmetric"),
        ([[2.0, 0.5, 0.0], [0.5, 1.0, 0.0], [0.0, 0.0, 1.0]], "unit diagonal"),
        ([[1.0, 0.5], [0.5, 1.0]], r"shape \(2, 2\); expected \(3, 3\)"),
    ],
)
def test_bad_correlation_matrix_is_rejected_with_a_clear_message(correlation, message):
    with pytest.raises(ModelError, match=message):
        MultiBlackScholes(spots=(100.0, 100.0, 100.0), correlation=correlation)


def test_correlation_number_outside_unit_interval_is_rejected():
    with pytest.raises(ParamError, match=r"correlation=1\.5 is outside \[-1, 1\]"):
        MultiBlackScholes(correlation=1.5)


class CorrelationAppliedTwice(MultiBlackScholes):
    """A plausible model bug: the correlation factor is applied to already correlated normals."""

    def _simulate(self, times, z, rng):
        return super()._simulate(times, z @ self._chol.T, rng)


def _log_returns(model: MultiBlackScholes, paths: int, seed: int) -> np.ndarray:
    z = np.random.default_rng(seed).standard_normal((paths, 1, model.n_assets))
    s = model.simulate(np.array([1.0]), z, np.random.default_rng(seed + 1)).s[:, 0, :]
    return np.log(s / model.spots)


def _correlation_z(model: MultiBlackScholes, target: np.ndarray, paths: int = 20_000, seed: int = 7) -> np.ndarray:
    """Fisher z statistics of the empirical correlations against ``target``: atanh(r_hat)
    is about normal with mean atanh(rho) and variance 1/(n - 3) (R. A. Fisher,
    "Frequency distribution of the values of the correlation coefficient in samples from an
    indefinitely large population", Biometrika 10(4), 1915)."""
    r = np.corrcoef(_log_returns(model, paths, seed), rowvar=False)
    i, j = np.triu_indices(model.n_assets, 1)
    return (np.arctanh(r[i, j]) - np.arctanh(target[i, j])) * math.sqrt(paths - 3)


CORRELATION = np.array([[1.0, 0.6, -0.3], [0.6, 1.0, 0.2], [-0.3, 0.2, 1.0]])
Z_CRIT = norm.isf(0.001 / 2 / 3)  # two-sided, Bonferroni over the three pairs at level 0.001


def test_model_reproduces_the_correlation_it_is_given():
    model = MultiBlackScholes(spots=(100.0, 90.0, 110.0), vols=(0.2, 0.3, 0.4), correlation=CORRELATION)
    assert np.abs(_correlation_z(model, CORRELATION)).max() < Z_CRIT


def test_correlation_applied_twice_is_seen_by_the_same_statistic():
    model = CorrelationAppliedTwice(spots=(100.0, 90.0, 110.0), vols=(0.2, 0.3, 0.4), correlation=CORRELATION)
    assert np.abs(_correlation_z(model, CORRELATION)).max() > Z_CRIT


def test_model_marginal_variances_match_the_volatilities():
    # sample variance of n normals: SE = sigma^2 sqrt(2 / (n - 1)) (common practice)
    model = MultiBlackScholes(spots=(100.0, 90.0, 110.0), vols=(0.2, 0.3, 0.4), correlation=CORRELATION)
    n = 20_000
    x = _log_returns(model, n, 11)
    var = model.vols**2
    z = (x.var(axis=0, ddof=1) - var) / (var * math.sqrt(2.0 / (n - 1)))
    assert np.abs(z).max() < Z_CRIT


def test_new_references_name_what_they_cannot_price():
    with pytest.raises(NoReference, match="at most 3"):
        BasketCall(assets=4).reference(correlated_market(4))
    with pytest.raises(NoReference, match="Stulz 1982.*two assets"):
        BestOfCall(assets=3).reference(correlated_market(3))
    with pytest.raises(NoReference, match="contract has 2 assets; the model 3"):
        SpreadCall().reference(correlated_market(3))
    comonotone = MultiBlackScholes(spots=(100.0, 95.0), vols=0.25, dividends=0.01, correlation=1.0)
    with pytest.raises(NoReference, match="no volatility"):
        WorstOfCall().reference(comonotone)


@pytest.mark.published
def test_best_of_reference_reads_the_model_in_the_right_order():
    # Haug 2007, options on the maximum or the minimum of two risky assets (Stulz 1982):
    # S1=100, S2=105, X=98, T=0.5, r=0.05, b1=-0.01, b2=-0.04, sigma1=0.11, sigma2=0.16,
    # rho=0.63: call on the maximum 8.0701 (from memory). q_i = r - b_i.
    model = MultiBlackScholes(spots=(100.0, 105.0), vols=(0.11, 0.16), dividends=(0.06, 0.09), correlation=0.63, rate=0.05)
    assert BestOfCall(strike=98.0, maturity=0.5).reference(model) == pytest.approx(8.0701, abs=5e-5)
