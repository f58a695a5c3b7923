"""Every variance-reduction method is unbiased and reports an honest standard error.

Over many seeds, the standardised errors ``(estimate - exact) / stderr`` of a correct
estimator are independent with mean 0 and variance 1 (Student's t with the estimate's
degrees of freedom, mapped to the normal scale). Two tests per method, each at level 1e-3:
``sum u_i / sqrt(K)`` against the normal (bias), ``sum u_i^2`` against chi-square with ``K``
degrees of freedom (a standard error computed over single paths of antithetic pairs, or
over paths instead of scrambles, would be detected here). Exact prices: the Black-Scholes
call and the Kemna-Vorst geometric Asian, written out with scipy in conftest.py.
"""

import math

import numpy as np
import pytest
from scipy import stats

from limitcase import BLOCK, Cashflows, MultiBlackScholes, evaluate, price
from limitcase.sampling import BrownianBridge, SamplingWarning
from limitcase_payoffs.vanilla import EuropeanCall

from .conftest import CALL_REFERENCE, MODEL, CallWithTwin, geometric_asian_call

SEEDS = range(24)
LEVEL = 1e-3


class GeometricAsianCall52(EuropeanCall):
    """Geometric-average call on 52 weekly fixings (a path-dependent payoff that tests the
    Brownian bridge end to end against its closed form)."""

    def dates(self):
        return np.arange(1, 53) / 52.0

    def payoff(self, obs):
        g = np.exp(np.log(obs.s).mean(axis=1))
        return np.maximum(g - self.strike, 0.0)


GEO_REF = geometric_asian_call(100.0, 100.0, list(np.arange(1, 53) / 52.0), 0.05, 0.02, 0.2)


def _standardised(product, exact, method, paths, seeds=SEEDS):
    u = []
    for seed in seeds:
        e = price(product, MODEL, paths=paths, seed=seed, method=method)
        z = (e.value - exact) / e.stderr
        if math.isfinite(e.dof):
            z = stats.norm.ppf(stats.t.cdf(z, e.dof))
        u.append(z)
    return np.array(u)


def _assert_calibrated(u):
    k = u.size
    assert abs(u.sum() / math.sqrt(k)) < stats.norm.isf(LEVEL / 2), u
    ss = float((u**2).sum())
    lo, hi = stats.chi2.ppf(LEVEL / 2, k), stats.chi2.isf(LEVEL / 2, k)
    assert lo < ss < hi, (ss, lo, hi, u)


@pytest.mark.parametrize("method", ["plain", "antithetic", "sobol", "control", "control+antithetic", "control+sobol"])
def test_european_call_unbiased_with_honest_errors(method):
    """With a control explaining over 99% of the variance (the call struck 1% higher), so
    that the control methods apply it under every source of normals."""
    product = CallWithTwin()
    if "control" in method:
        assert evaluate([product], MODEL, paths=BLOCK, seed=0, method=method).uses_controls([1.0])
    _assert_calibrated(_standardised(product, CALL_REFERENCE, method, BLOCK))


@pytest.mark.parametrize("method", ["antithetic", "sobol", "control+sobol"])
def test_geometric_asian_unbiased_through_the_bridge(method):
    _assert_calibrated(_standardised(GeometricAsianCall52(), GEO_REF, method, BLOCK, seeds=range(16)))


def test_antithetic_error_is_over_pair_means():
    """The standard error equals the sample standard deviation of the pair means over the
    square root of the number of pairs, computed here from the paths themselves."""
    seen = []

    class Spy(EuropeanCall):
        def payoff(self, obs):
            out = super().payoff(obs)
            seen.append(out * math.exp(-0.05 * self.maturity))
            return out

    e = price(Spy(), MODEL, paths=2 * BLOCK, seed=4, method="antithetic")
    pairs = np.concatenate([0.5 * (x[: x.size // 2] + x[x.size // 2 :]) for x in seen])
    assert e.paths == 2 * BLOCK and e.dof == pairs.size - 1
    assert e.value == pytest.approx(pairs.mean(), rel=1e-13)
    assert e.stderr == pytest.approx(pairs.std(ddof=1) / math.sqrt(pairs.size), rel=1e-10)
    single = np.concatenate(seen)
    assert e.stderr < 0.8 * single.std(ddof=1) / math.sqrt(single.size)  # a call's pairs are negatively correlated


def test_sobol_normals_are_standard_and_independent():
    """What the Sobol sampler hands the model: for each date, standard normals
    (Kolmogorov-Smirnov against scipy's normal), uncorrelated across dates."""
    seen = []

    class Spy(EuropeanCall):
        def dates(self):
            return np.arange(1, 13) / 12.0

        def payoff(self, obs):
            seen.append(np.diff(np.log(obs.s), axis=1, prepend=math.log(100.0)))
            return super().payoff(obs)

    evaluate([Spy()], MODEL, paths=4 * BLOCK, seed=2, method="sobol")
    x = np.concatenate(seen)
    dt = 1.0 / 12.0
    z = (x - (0.05 - 0.02 - 0.02) * dt) / (0.2 * math.sqrt(dt))
    for j in range(12):
        assert stats.kstest(z[:, j], "norm").pvalue > 1e-3
    c = np.corrcoef(z, rowvar=False)[np.triu_indices(12, 1)]
    assert np.max(np.abs(c)) < 4.5 / math.sqrt(z.shape[0])


def test_brownian_bridge_reproduces_the_increments():
    """The bridge is a change of variables: with the normals in bridge order it returns
    increments whose covariance is the identity (computed exactly, from the linear map)."""
    t = np.array([0.1, 0.25, 0.3, 0.7, 0.71, 1.0, 2.0])
    bb = BrownianBridge(t)
    m = t.size
    eye = np.eye(m).reshape(m, m, 1)  # path i has normal 1 at bridge position i
    out = np.empty_like(eye)
    bb.increments(eye, out)
    a = out[:, :, 0]  # rows: bridge position, cols: increments
    assert np.allclose(a.T @ a, np.eye(m), atol=1e-12)


def test_control_coefficient_comes_from_the_pilot():
    """The coefficient is fitted on the pilot paths: the same pricing paths with another
    pilot give another estimate (a coefficient fitted on the pricing paths could not)."""
    call = EuropeanCall()
    j = evaluate([call], MODEL, paths=BLOCK, seed=1, method="control")
    assert j.controls == ("underlying at 1",)
    assert j.pilot_cov is not None and j.pilot_cov.shape == (2, 2)
    beta = j.beta([1.0])
    xbar = np.concatenate([j.mean, j.control_mean])
    fitted_here = j.full_cov[1:, 0] / j.full_cov[1, 1]
    assert beta[0] != fitted_here[0]
    e = j.estimate([1.0])
    assert e.value == pytest.approx(xbar[0] - beta[0] * (xbar[1] - j.control_exact[0]), rel=1e-14)
    raw = j.estimate([1.0], controls=False)
    assert e.stderr < raw.stderr / 2


def test_controls_under_sobol_only_when_they_explain_most_of_the_variance():
    """Under Sobol points a control applies only with a pilot R^2 of at least 0.9: the
    geometric-Asian control of an arithmetic Asian does, the underlying of a call does not."""
    from limitcase.engine import SOBOL_CONTROL_R2
    from limitcase_payoffs.asians import ArithmeticAsianCall

    asian = evaluate([ArithmeticAsianCall(fixings=52)], MODEL, paths=BLOCK, seed=1, method="control+sobol")
    assert asian.pilot_r2([1.0]) > 0.99 and asian.method_for([1.0]) == "control+sobol"
    call = evaluate([EuropeanCall()], MODEL, paths=BLOCK, seed=1, method="control+sobol")
    assert call.pilot_r2([1.0]) < SOBOL_CONTROL_R2 and call.method_for([1.0]) == "sobol"
    assert call.estimate([1.0]).value == call.estimate([1.0], controls=False).value
    plain = evaluate([EuropeanCall()], MODEL, paths=BLOCK, seed=1, method="control")
    assert plain.method_for([1.0]) == "control" and plain.estimate([1.0]).stderr < plain.estimate([1.0], controls=False).stderr


def test_sobol_falls_back_with_a_warning_for_many_normals():
    m = MultiBlackScholes(spots=[100.0] * 6, vols=0.2, correlation=0.3)

    class FirstAsset(EuropeanCall):
        multi_asset = True
        n_assets = 6

        def payoff(self, obs):
            return np.maximum(obs.s[:, -1, 0] - self.strike, 0.0)

    with pytest.warns(SamplingWarning, match="6 normals per date"):
        j = evaluate([FirstAsset()], m, paths=BLOCK, seed=1, method="sobol")
    assert j.method == "plain" and "Sobol points not used" in j.notes[0]
    auto = evaluate([FirstAsset()], m, paths=BLOCK, seed=1, method="auto")
    assert auto.method == "control+antithetic"


def test_cashflow_products_and_early_exercise_under_every_method():
    """Cash flows paid at several dates go through every sampler; the estimate agrees with
    the discounted sum of forwards (each coupon pays S(t_i), worth S0 exp(-q t_i))."""

    class Coupons(EuropeanCall):
        def dates(self):
            return np.array([0.25, 0.5, 1.0])

        def payoff(self, obs):
            return Cashflows(obs.s, obs.t[None, :])

    exact = sum(100.0 * math.exp(-0.02 * t) for t in (0.25, 0.5, 1.0))
    for method in ("antithetic", "sobol", "control"):
        e = price(Coupons(), MODEL, paths=2 * BLOCK, seed=3, method=method)
        assert abs(e.value - exact) < 4.0 * e.stderr + 1e-9 * exact, (method, e)
