"""Chooser and power options: every declared check passes, every check catches a realistic
bug, the chooser meets Haug's worked example and the power call an independent quadrature."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate

from limitcase import BlackScholes, ParamError, price

from limitcase.references import power_option, simple_chooser
from limitcase.testing import assert_all_pass, assert_caught, assert_every_check_has_a_twin
from limitcase_payoffs.chooser import SimpleChooser
from limitcase_payoffs.power import PowerCall, PowerPut

PRODUCTS = [SimpleChooser, PowerCall, PowerPut]


@pytest.mark.parametrize("product", PRODUCTS, ids=lambda c: c.__name__)
def test_every_declared_check_passes(product):
    assert_all_pass(product, paths=10_000)


# --- broken twins ----------------------------------------------------------------------


def _legs(p, s_end):
    return np.maximum(s_end - p.strike, 0.0), np.maximum(p.strike - s_end, 0.0)


class ChooserOnTodaysSpot(SimpleChooser):
    """Decides on today's spot whatever the choice time."""

    def payoff(self, obs):
        left = self.maturity - self.choose_time
        call = obs.s0 * math.exp(-obs.dividend * left) >= self.strike * math.exp(-obs.rate * left)
        c, p = _legs(self, obs.s[:, -1])
        return np.where(call, c, p)


class ChooserWithoutCarry(SimpleChooser):
    """Compares S(t) with K, forgetting the discounting of both to T."""

    def payoff(self, obs):
        s_choice = obs.s[:, 0] if self.choose_time > 0.0 else obs.s0
        c, p = _legs(self, obs.s[:, -1])
        return np.where(s_choice >= self.strike, c, p)


class ChooserTakesTheWorse(SimpleChooser):
    """Comparison flipped: takes the option worth less."""

    def payoff(self, obs):
        s_choice = obs.s[:, 0] if self.choose_time > 0.0 else obs.s0
        left = self.maturity - self.choose_time
        call = s_choice * math.exp(-obs.dividend * left) <= self.strike * math.exp(-obs.rate * left)
        c, p = _legs(self, obs.s[:, -1])
        return np.where(call, c, p)


class ChooserPutAtTheChoice(SimpleChooser):
    """Settles a chosen put on the price at the choice date instead of S(T)."""

    def payoff(self, obs):
        s_choice = obs.s[:, 0] if self.choose_time > 0.0 else obs.s0
        left = self.maturity - self.choose_time
        call = s_choice * math.exp(-obs.dividend * left) >= self.strike * math.exp(-obs.rate * left)
        c, _ = _legs(self, obs.s[:, -1])
        return np.where(call, c, np.maximum(self.strike - s_choice, 0.0))


class PowerCallIgnoresPower(PowerCall):
    """Squares S(T) whatever the power."""

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] ** 2 - self.strike, 0.0)


class PowerCallPowersTheStrike(PowerCall):
    """Raises the strike to the power too: S^p - K^p."""

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] ** self.power - self.strike**self.power, 0.0)


class PowerCallSymmetric(PowerCall):
    """The symmetric power option by mistake: max(S(T) - K, 0)^p."""

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] - self.strike, 0.0) ** self.power


class PowerCallPaysThePut(PowerCall):
    """Call/put flag inverted."""

    def payoff(self, obs):
        return np.maximum(self.strike - obs.s[:, -1] ** self.power, 0.0)


class PowerPutIgnoresPower(PowerPut):
    """Squares S(T) whatever the power."""

    def payoff(self, obs):
        return np.maximum(self.strike - obs.s[:, -1] ** 2, 0.0)


class PowerPutAbsoluteValue(PowerPut):
    """|K - S(T)^p| instead of the positive part."""

    def payoff(self, obs):
        return np.abs(self.strike - obs.s[:, -1] ** self.power)


class PowerPutSymmetric(PowerPut):
    """The symmetric power option by mistake: max(K - S(T), 0)^p."""

    def payoff(self, obs):
        return np.maximum(self.strike - obs.s[:, -1], 0.0) ** self.power


class PowerPutPaysTheCall(PowerPut):
    """Call/put flag inverted."""

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] ** self.power - self.strike, 0.0)


BROKEN = [
    (ChooserOnTodaysSpot, "choice_at_maturity"),
    (ChooserWithoutCarry, "choice_today_call"),
    (ChooserTakesTheWorse, "choice_today_put"),
    (ChooserTakesTheWorse, "closed_form"),
    (ChooserPutAtTheChoice, "at_most_straddle"),
    (ChooserTakesTheWorse, "at_least_better_of_call_and_put"),
    (PowerCallIgnoresPower, "power_one"),
    (PowerCallPowersTheStrike, "closed_form"),
    (PowerCallSymmetric, "power_parity"),
    (PowerCallPaysThePut, "decreasing_in_strike"),
    (PowerPutIgnoresPower, "power_one"),
    (PowerPutAbsoluteValue, "zero_strike"),
    (PowerPutSymmetric, "closed_form"),
    (PowerPutPaysTheCall, "increasing_in_strike"),
]


@pytest.mark.parametrize("broken, case", BROKEN, ids=lambda x: x if isinstance(x, str) else x.__name__)
def test_broken_twin_is_caught(broken, case):
    assert_caught(broken, case, paths=10_000)


def test_every_declared_check_has_a_broken_twin():
    assert_every_check_has_a_twin(PRODUCTS, BROKEN)


# --- edges and bad input ----------------------------------------------------------------


def test_choice_after_maturity_is_refused():
    with pytest.raises(ParamError, match=r"choose_time=1\.5 is after maturity=1\.0"):
        SimpleChooser(choose_time=1.5, maturity=1.0)


def test_chooser_dates():
    assert SimpleChooser(choose_time=0.25, maturity=1.0).dates().tolist() == [0.25, 1.0]
    assert SimpleChooser(choose_time=0.0, maturity=1.0).dates().tolist() == [1.0]
    assert SimpleChooser(choose_time=1.0, maturity=1.0).dates().tolist() == [1.0]


# --- published and independent values -------------------------------------------------------

Z = 3.29  # two-sided level 0.001


@pytest.mark.published
def test_chooser_meets_haugs_example():
    """E. G. Haug, The Complete Guide to Option Pricing Formulas, 2nd ed. (2007), ch. 4,
    simple chooser (Rubinstein 1991): S = K = 50, t = 0.25, T = 0.5, r = b = 0.08 (q = 0),
    sigma = 0.25: 6.1071 (from memory, recomputed by the closed form to 4 decimals)."""
    assert abs(simple_chooser(50.0, 50.0, 0.25, 0.5, 0.08, 0.0, 0.25) - 6.1071) <= 5e-5
    product = SimpleChooser(strike=50.0, choose_time=0.25, maturity=0.5)
    est = price(product, BlackScholes(spot=50.0, rate=0.08, dividend=0.0, vol=0.25), paths=40_000, seed=13)
    assert abs(est.value - 6.1071) <= 5e-5 + Z * est.stderr, est


def test_power_call_meets_quadrature():
    """Independent value: exp(-rT) E[max(S(T)^p - K, 0)] by scipy quadrature over the
    log-normal density of S(T) (no closed form involved), for p = 2, S0 = 100,
    K = 10 000, r = 0.05, q = 0.02, sigma = 0.2, T = 1; both the Heynen-Kat closed form
    and the Monte Carlo price must meet it."""
    s0, k, p, r, q, vol, t = 100.0, 10_000.0, 2.0, 0.05, 0.02, 0.2, 1.0
    m, sd = math.log(s0) + (r - q - 0.5 * vol * vol) * t, vol * math.sqrt(t)

    def integrand(z):
        return max(math.exp(p * (m + sd * z)) - k, 0.0) * math.exp(-0.5 * z * z) / math.sqrt(2.0 * math.pi)

    kink = (math.log(k) / p - m) / sd
    value, err = integrate.quad(integrand, kink, 12.0, epsabs=1e-10, epsrel=1e-12)
    value *= math.exp(-r * t)
    assert err < 1e-6
    assert abs(power_option(s0, k, p, t, r, q, vol, "call") - value) <= 1e-6 * value
    est = price(PowerCall(strike=k, power=p, maturity=t), BlackScholes(spot=s0, rate=r, dividend=q, vol=vol),
                paths=40_000, seed=17)
    assert abs(est.value - value) <= Z * est.stderr, (est, value)
