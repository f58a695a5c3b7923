"""Digitals and gap options: every declared check passes, every check catches a realistic
bug, and Monte Carlo prices meet Haug's worked examples."""

from __future__ import annotations

import numpy as np
import pytest

from limitcase import BlackScholes, price

from limitcase.references import asset_or_nothing, cash_or_nothing, gap_option
from limitcase.testing import assert_all_pass, assert_caught, assert_every_check_has_a_twin
from limitcase_payoffs.digitals import (
    AssetOrNothingCall,
    AssetOrNothingPut,
    CashOrNothingCall,
    CashOrNothingPut,
    GapCall,
    GapPut,
)

PRODUCTS = [CashOrNothingCall, CashOrNothingPut, AssetOrNothingCall, AssetOrNothingPut, GapCall, GapPut]


@pytest.mark.parametrize("product", PRODUCTS, ids=lambda c: c.__name__)
def test_every_declared_check_passes(product):
    assert_all_pass(product, paths=10_000)


# --- broken twins ----------------------------------------------------------------------


class CashCallAgainstTodaysSpot(CashOrNothingCall):
    """Compares S(T) with today's spot instead of the strike."""

    def payoff(self, obs):
        return np.where(obs.s[:, -1] > obs.s0, self.cash, 0.0)


class CashCallPaysTheAsset(CashOrNothingCall):
    """Pays the asset instead of the cash."""

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s > self.strike, s, 0.0)


class CashCallScaledByMoneyness(CashOrNothingCall):
    """Pays C S(T)/K (a quanto-style scaling left in)."""

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s > self.strike, self.cash * s / self.strike, 0.0)


class CashCallReversed(CashOrNothingCall):
    """Inequality reversed: pays when S(T) < K."""

    def payoff(self, obs):
        return np.where(obs.s[:, -1] < self.strike, self.cash, 0.0)


class CashCallInclusive(CashOrNothingCall):
    """S(T) >= K instead of S(T) > K."""

    def payoff(self, obs):
        return np.where(obs.s[:, -1] >= self.strike, self.cash, 0.0)


class CashPutReversed(CashOrNothingPut):
    """Inequality reversed: pays when S(T) > K."""

    def payoff(self, obs):
        return np.where(obs.s[:, -1] > self.strike, self.cash, 0.0)


class CashPutPaysTheAsset(CashOrNothingPut):
    """Pays the asset instead of the cash."""

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s < self.strike, s, 0.0)


class CashPutInclusive(CashOrNothingPut):
    """S(T) <= K instead of S(T) < K."""

    def payoff(self, obs):
        return np.where(obs.s[:, -1] <= self.strike, self.cash, 0.0)


class AssetCallPaysTheStrike(AssetOrNothingCall):
    """Pays K instead of the asset."""

    def payoff(self, obs):
        return np.where(obs.s[:, -1] > self.strike, self.strike, 0.0)


class AssetCallAgainstTodaysSpot(AssetOrNothingCall):
    """Compares today's spot with the strike instead of S(T)."""

    def payoff(self, obs):
        return np.where(obs.s0 > self.strike, obs.s[:, -1], 0.0)


class AssetCallPlusStrike(AssetOrNothingCall):
    """Pays S(T) + K when in the money (a gap template with the sign of K2 flipped)."""

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s > self.strike, s + self.strike, 0.0)


class AssetCallInclusive(AssetOrNothingCall):
    """S(T) >= K instead of S(T) > K."""

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s >= self.strike, s, 0.0)


class AssetPutReversed(AssetOrNothingPut):
    """Inequality reversed: pays when S(T) > K."""

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s > self.strike, s, 0.0)


class AssetPutPaysTheStrike(AssetOrNothingPut):
    """Pays K instead of the asset."""

    def payoff(self, obs):
        return np.where(obs.s[:, -1] < self.strike, self.strike, 0.0)


class AssetPutInclusive(AssetOrNothingPut):
    """S(T) <= K instead of S(T) < K."""

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s <= self.strike, s, 0.0)


class GapCallSignFlipped(GapCall):
    """Pays K2 - S(T) instead of S(T) - K2."""

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s > self.trigger, self.strike - s, 0.0)


class GapCallLevelsSwapped(GapCall):
    """Trigger and strike swapped: pays S(T) - K1 when S(T) > K2."""

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s > self.strike, s - self.trigger, 0.0)


class GapCallInclusive(GapCall):
    """S(T) >= K1 instead of S(T) > K1."""

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s >= self.trigger, s - self.strike, 0.0)


class GapPutSignFlipped(GapPut):
    """Pays S(T) - K2 instead of K2 - S(T)."""

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s < self.trigger, s - self.strike, 0.0)


class GapPutLevelsSwapped(GapPut):
    """Trigger and strike swapped: pays K1 - S(T) when S(T) < K2."""

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s < self.strike, self.trigger - s, 0.0)


class GapPutInclusive(GapPut):
    """S(T) <= K1 instead of S(T) < K1."""

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s <= self.trigger, self.strike - s, 0.0)


BROKEN = [
    (CashCallAgainstTodaysSpot, "zero_strike"),
    (CashCallPaysTheAsset, "closed_form"),
    (CashCallInclusive, "ends_at_the_strike"),
    (CashCallScaledByMoneyness, "below_bond"),
    (CashCallReversed, "decreasing_in_strike"),
    (CashPutReversed, "zero_strike"),
    (CashPutPaysTheAsset, "closed_form"),
    (CashPutInclusive, "ends_at_the_strike"),
    (CashPutPaysTheAsset, "call_plus_put_is_bond"),
    (CashPutReversed, "increasing_in_strike"),
    (AssetCallPaysTheStrike, "zero_strike"),
    (AssetCallAgainstTodaysSpot, "closed_form"),
    (AssetCallInclusive, "ends_at_the_strike"),
    (AssetCallPaysTheStrike, "minus_cash_digital_is_call"),
    (AssetCallPlusStrike, "below_prepaid_forward"),
    (AssetPutReversed, "zero_strike"),
    (AssetPutPaysTheStrike, "closed_form"),
    (AssetPutInclusive, "ends_at_the_strike"),
    (AssetPutPaysTheStrike, "call_plus_put_is_forward"),
    (AssetPutReversed, "cash_digital_minus_put_is_put"),
    (GapCallSignFlipped, "trigger_at_strike"),
    (GapCallLevelsSwapped, "closed_form"),
    (GapCallInclusive, "ends_at_the_trigger"),
    (GapCallLevelsSwapped, "asset_minus_cash_digitals"),
    (GapCallLevelsSwapped, "gap_parity"),
    (GapPutSignFlipped, "trigger_at_strike"),
    (GapPutLevelsSwapped, "closed_form"),
    (GapPutInclusive, "ends_at_the_trigger"),
    (GapPutLevelsSwapped, "cash_minus_asset_digitals"),
    (CashCallInclusive, "tie_at_strike"),
    (CashPutInclusive, "tie_at_strike"),
    (AssetCallInclusive, "tie_at_strike"),
    (AssetPutInclusive, "tie_at_strike"),
    (GapCallInclusive, "tie_at_trigger"),
    (GapPutInclusive, "tie_at_trigger"),
]


@pytest.mark.parametrize("broken, case", BROKEN, ids=lambda x: x if isinstance(x, str) else x.__name__)
def test_broken_twin_is_caught(broken, case):
    assert_caught(broken, case, paths=10_000)


def test_every_declared_check_has_a_broken_twin():
    assert_every_check_has_a_twin(PRODUCTS, BROKEN)


# --- published examples -----------------------------------------------------------------

Z = 3.29  # two-sided level 0.001 per example


@pytest.mark.published
@pytest.mark.parametrize(
    "product, model, published, recompute",
    [
        # Haug (2007), ch. 4, cash-or-nothing example (Reiner and Rubinstein 1991): S = 100,
        # K = 80, cash 10, T = 0.75, r = 0.06, b = 0 (q = 0.06), sigma = 0.35: put 2.6710.
        (
            CashOrNothingPut(strike=80.0, cash=10.0, maturity=0.75),
            BlackScholes(spot=100.0, rate=0.06, dividend=0.06, vol=0.35),
            2.6710,
            lambda: cash_or_nothing(100.0, 80.0, 0.75, 0.06, 0.06, 0.35, 10.0, "put"),
        ),
        # Haug (2007), ch. 4, asset-or-nothing example: S = 70, K = 65, T = 0.5, r = 0.07,
        # b = 0.02 (q = 0.05), sigma = 0.27: put 20.2069.
        (
            AssetOrNothingPut(strike=65.0, maturity=0.5),
            BlackScholes(spot=70.0, rate=0.07, dividend=0.05, vol=0.27),
            20.2069,
            lambda: asset_or_nothing(70.0, 65.0, 0.5, 0.07, 0.05, 0.27, "put"),
        ),
        # Haug (2007), ch. 4, gap option example: S = 50, K1 = 50, K2 = 57, T = 0.5,
        # r = b = 0.09 (q = 0), sigma = 0.20: call -0.0053.
        (
            GapCall(strike=57.0, trigger=50.0, maturity=0.5),
            BlackScholes(spot=50.0, rate=0.09, dividend=0.0, vol=0.20),
            -0.0053,
            lambda: gap_option(50.0, 57.0, 50.0, 0.5, 0.09, 0.0, 0.20, "call"),
        ),
    ],
    ids=["cash_or_nothing_put", "asset_or_nothing_put", "gap_call"],
)
def test_monte_carlo_meets_haugs_examples(product, model, published, recompute):
    """Values from memory (REFERENCE-VALUES.md, M+C), recomputed by the closed forms to the
    printed 4 decimals; the Monte Carlo price must meet them within Z standard errors plus
    the print precision 5e-5."""
    assert abs(recompute() - published) <= 5e-5
    est = price(product, model, paths=40_000, seed=11)
    assert abs(est.value - published) <= 5e-5 + Z * est.stderr, est
