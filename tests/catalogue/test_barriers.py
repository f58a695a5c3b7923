"""Barrier options: every declared check passes, every declared check catches a realistic
bug, the continuous-monitoring Monte Carlo meets Haug's standard barrier table and the
discrete one an independent backward induction on the Broadie-Glasserman-Kou setting.

Broken twins override ``payoff`` with one bug each (written out in full below, the way a
product author would slip); ``assert_caught`` runs the named check alone and needs it to
fail. Every declared check of every barrier class gets a twin.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from limitcase import BlackScholes, price
from limitcase.reduce import checks_for
from limitcase.references import BGK_BETA, barrier_option
from limitcase.testing import assert_all_pass, assert_caught
from limitcase_payoffs import barriers as B

CLASSES = list(B.FAMILY.values())


@pytest.mark.parametrize("product", CLASSES, ids=lambda c: c.__name__)
def test_every_declared_check_passes(product):
    assert_all_pass(product, paths=10_000)


# --- broken payoffs ------------------------------------------------------------------------


def _vanilla(p, s):
    return np.maximum(s - p.strike, 0.0) if p.call else np.maximum(p.strike - s, 0.0)


def _settle(p, obs, alive, vanilla=None):
    """Pays at T as a barrier option that is untouched with probability ``alive``."""
    v = _vanilla(p, obs.s[:, -1]) if vanilla is None else vanilla
    if p.out:
        return v * alive + p.rebate * (1.0 - alive)
    return v * (1.0 - alive) + p.rebate * alive


def _with_today(obs):
    return np.column_stack([np.full(obs.paths, obs.s0), obs.s])


def only_at_maturity(self, obs):
    """Tests the barrier on the last date only (not today, not between dates)."""
    s = obs.s[:, -1]
    return _settle(self, obs, (s < self.barrier if self.up else s > self.barrier).astype(float))


def wrong_side(self, obs):
    """An up barrier tested as if it were a down one (and vice versa)."""
    s = _with_today(obs)
    return _settle(self, obs, np.all(s > self.barrier if self.up else s < self.barrier, axis=1).astype(float))


def misses_last_date(self, obs):
    """The monitoring loop stops one date early."""
    return _settle(self, obs, self.untouched(obs)[:, -2])


def rebate_dropped(self, obs):
    """The rebate is never paid."""
    return _settle(self.replace(rebate=0.0), obs, self.untouched(obs)[:, -1])


def rebate_twice(self, obs):
    """A knock-out's rebate paid at the touch and again at T."""
    return _settle(self.replace(rebate_at_hit=0), obs, self.untouched(obs)[:, -1]) + _late_rebate(self, obs)


def _late_rebate(self, obs):
    return self.rebate * (1.0 - self.untouched(obs)[:, -1])


def rebate_even_if_knocked_in(self, obs):
    """A knock-in that pays its rebate whatever happens."""
    return _settle(self, obs, self.untouched(obs)[:, -1]) + _late_rebate(self, obs)


def rebate_at_expiry_always(self, obs):
    """The knock-out's rebate is paid at T even when it is due at the touch."""
    return _settle(self, obs, self.untouched(obs)[:, -1])


def in_out_swapped(self, obs):
    """Knocked in where it should be knocked out (and vice versa)."""
    return _settle(self, obs, 1.0 - self.untouched(obs)[:, -1])


def best_fixing(self, obs):
    """Pays the vanilla on the best fixing (a lookback template), not on S(T)."""
    best = _vanilla(self, obs.s).max(axis=1)
    return _settle(self, obs, self.untouched(obs)[:, -1], vanilla=best)


def bgk_wrong_sign(self, obs):
    """The Broadie-Glasserman-Kou shift applied with the wrong sign: the barrier moved
    towards the spot by exp(beta sigma sqrt(dt)) instead of away from it."""
    shift = math.exp(BGK_BETA * math.sqrt(float(np.ravel(obs.step_var)[-1])))
    moved = self.replace(barrier=self.barrier / shift if self.up else self.barrier * shift)
    return _settle(self, obs, moved.untouched(obs)[:, -1])


def _bridged(self, obs, variance, first):
    """Survival with the Brownian-bridge factor on intervals ``first``.. only, with the
    given per-interval ``variance``."""
    s = _with_today(obs)
    live = (s < self.barrier if self.up else s > self.barrier).astype(float)
    d = np.log(s / self.barrier)
    cross = np.exp(-2.0 * np.maximum(d[:, :-1] * d[:, 1:], 0.0) / variance)
    live[:, 1 + first:] *= 1.0 - cross[:, first:]
    return np.prod(live, axis=1)


def no_bridge(self, obs):
    """A continuous barrier monitored on the simulated dates only."""
    s = _with_today(obs)
    return _settle(self, obs, np.all(s < self.barrier if self.up else s > self.barrier, axis=1).astype(float))


def bridge_skips_today(self, obs):
    """The Brownian bridge starts at the first date: the interval from today is not bridged."""
    return _settle(self, obs, _bridged(self, obs, obs.step_var, first=1))


def whole_life_variance(self, obs):
    """The bridge uses sigma^2 T instead of sigma^2 dt for each interval."""
    return _settle(self, obs, _bridged(self, obs, np.sum(obs.step_var), first=0))


def touch_strict(self, obs):
    """A fixing exactly on the barrier does not touch it (S > H for an up barrier instead of
    S >= H): the comparison's strictness swapped, visible only on a fixing at the level."""
    nudged = self.barrier * (1.0 + 1e-12) if self.up else self.barrier * (1.0 - 1e-12)
    return super(type(self), self.replace(barrier=nudged)).payoff(obs)


BUGS = {
    "discrete_out": {
        "tie_at_barrier": touch_strict,
        "barrier_out_of_reach": wrong_side,
        "touched_today": only_at_maturity,
        "touched_today_rebate_paid_now": rebate_at_expiry_always,
        "in_plus_out_is_vanilla": only_at_maturity,
        "in_plus_out_with_rebates": misses_last_date,
        "worth_more_as_barrier_moves_away": in_out_swapped,
        "at_most_vanilla": best_fixing,
        "at_least_continuous": bgk_wrong_sign,
        "closed_form": best_fixing,
    },
    "discrete_in": {
        "tie_at_barrier": touch_strict,
        "barrier_out_of_reach": rebate_dropped,
        "touched_today": only_at_maturity,
        "in_plus_out_is_vanilla": only_at_maturity,
        "in_plus_out_with_rebates": rebate_even_if_knocked_in,
        "worth_less_as_barrier_moves_away": in_out_swapped,
        "at_most_vanilla": best_fixing,
        "at_most_continuous": bgk_wrong_sign,
        "closed_form": best_fixing,
    },
    "continuous_out": {
        "barrier_out_of_reach": wrong_side,
        "touched_today": only_at_maturity,
        "touched_today_rebate_paid_now": rebate_at_expiry_always,
        "closed_form": no_bridge,
        "closed_form_rebate": rebate_dropped,
        "closed_form_one_interval": bridge_skips_today,
        "closed_form_haug_cell": whole_life_variance,
        "closed_form_rebate_at_expiry": rebate_twice,
        "rebate_only": rebate_at_expiry_always,
        "in_plus_out_is_vanilla": only_at_maturity,
        "in_plus_out_with_rebates": rebate_twice,
        "worth_more_as_barrier_moves_away": in_out_swapped,
        "at_most_vanilla": best_fixing,
    },
    "continuous_in": {
        "barrier_out_of_reach": rebate_dropped,
        "touched_today": only_at_maturity,
        "closed_form": in_out_swapped,
        "closed_form_rebate": no_bridge,
        "closed_form_one_interval": bridge_skips_today,
        "closed_form_haug_cell": whole_life_variance,
        "in_plus_out_is_vanilla": only_at_maturity,
        "in_plus_out_with_rebates": rebate_even_if_knocked_in,
        "worth_less_as_barrier_moves_away": in_out_swapped,
        "at_most_vanilla": best_fixing,
    },
}


def _group(cls):
    return f"{'continuous' if cls.continuous else 'discrete'}_{'out' if cls.out else 'in'}"


def _twin(cls, bug):
    return type(f"{cls.__name__}_{bug.__name__}", (cls,), {"payoff": bug, "__doc__": bug.__doc__})


TWINS = [(cls, case, bug) for cls in CLASSES for case, bug in BUGS[_group(cls)].items()]


@pytest.mark.parametrize("cls, case, bug", TWINS, ids=[f"{c.__name__}-{k}" for c, k, _ in TWINS])
def test_broken_twin_is_caught(cls, case, bug):
    # a path-by-path check sees a bug on the first path it changes; a comparison with a
    # closed form needs enough paths for the bias to stand out of the noise
    statistical = case.startswith("closed_form") or case == "rebate_only"
    assert_caught(_twin(cls, bug), case, paths=20_000 if statistical else 10_000)


def test_every_declared_check_has_a_broken_twin():
    for cls in CLASSES:
        declared = {c.case for c in checks_for(cls)}
        assert declared == set(BUGS[_group(cls)]), cls.__name__


def test_in_plus_out_closed_forms_add_up():
    """Outside the product checks: the two Reiner-Rubinstein closed forms of a knock-out
    (rebate at T) and its knock-in add up to the Black-Scholes put plus R exp(-rT), and the
    Monte Carlo price of the pair meets that sum (z = 3.29)."""
    from limitcase import evaluate
    from limitcase.references import black_scholes

    args = (100.0, 100.0, 95.0, 0.5, 0.08, 0.04, 0.25, 3.0)
    pair = barrier_option("down-and-out-put", *args, rebate_at_hit=False) + barrier_option("down-and-in-put", *args)
    assert abs(pair - black_scholes(100.0, 100.0, 0.5, 0.08, 0.04, 0.25, "put") - 3.0 * math.exp(-0.04)) < 1e-10
    out = B.DownAndOutPutContinuous(rebate=3.0, rebate_at_hit=0)
    joint = evaluate([out, B.DownAndInPutContinuous(rebate=3.0)], out.scenario(), paths=8192, seed=3)
    est = joint.estimate([1.0, 1.0])
    assert abs(est.value - pair) <= 3.29 * est.stderr, (est, pair)


# --- Haug's standard barrier table, continuous monitoring ---------------------------------

HAUG_CELLS = [
    # E. G. Haug, The Complete Guide to Option Pricing Formulas, 2nd ed. (2007), ch. 4,
    # table of standard barrier options (Reiner and Rubinstein 1991): S = 100, r = 0.08,
    # b = 0.04, T = 0.5, rebate 3. Values from memory, recomputed below by the reference
    # library's closed form (agreement within the table's printed precision).
    (B.DownAndOutCallContinuous, 95.0, 100.0, 0.25, 6.7924),
    (B.UpAndOutCallContinuous, 105.0, 100.0, 0.25, 2.3580),
    (B.DownAndInPutContinuous, 95.0, 100.0, 0.25, 6.5677),
    (B.UpAndInPutContinuous, 105.0, 100.0, 0.25, 3.3721),
    (B.DownAndInCallContinuous, 95.0, 110.0, 0.30, 2.8517),
    (B.UpAndOutPutContinuous, 105.0, 90.0, 0.30, 4.2293),
]
HAUG_PRECISION = 2e-4  # REFERENCE-VALUES.md: a few printed cells differ in the last digit
Z_CELL = 3.29  # two-sided level 0.001 per cell, so at most 0.006 over the six cells


@pytest.mark.published
@pytest.mark.parametrize("cls, barrier, strike, vol, published", HAUG_CELLS,
                         ids=[f"{c.__name__}-H{h:g}-K{k:g}-vol{v:g}" for c, h, k, v, _ in HAUG_CELLS])
def test_continuous_monte_carlo_meets_haugs_table(cls, barrier, strike, vol, published):
    product = cls(strike=strike, barrier=barrier, rebate=3.0)
    model = BlackScholes(spot=100.0, rate=0.08, dividend=0.04, vol=vol)
    kind = B._kind(product)
    assert abs(barrier_option(kind, 100.0, strike, barrier, 0.5, 0.08, 0.04, vol, 3.0) - published) <= HAUG_PRECISION
    est = price(product, model, paths=40_000, seed=5)
    # knock-outs pay the rebate at the end of the simulation interval of the touch: a bias
    # of at most R (1 - exp(-r dt)), declared by the product's checks as well
    timing = B._hit_timing(product, model)
    assert abs(est.value - published) <= HAUG_PRECISION + timing + Z_CELL * est.stderr, (est, published)


# --- discrete monitoring against an independent backward induction -------------------------


def discrete_down_and_out_call(spot, strike, barrier, maturity, rate, vol, dates, nodes=2001):
    """Down-and-out call monitored on ``dates`` equally spaced dates (no dividend), by
    backward induction on a uniform log-price grid from log H up:
    V_j(x) = exp(-r dt) int_{log H}^inf V_{j+1}(y) p(y - x) dy, p the exact Gaussian
    transition of log S over dt, by the trapezoidal rule (a convolution, the kernel cut at
    12 standard deviations), then Richardson extrapolation from ``nodes`` and half as many
    intervals (the rule's error is O(h^2)). Shares nothing with the Monte Carlo engine
    or the closed forms."""

    def induction(n):
        dt = maturity / dates
        sd = vol * math.sqrt(dt)
        mu = (rate - 0.5 * vol * vol) * dt
        lo = math.log(barrier / spot)
        hi = max(0.0, math.log(strike / spot)) + 10.0 * vol * math.sqrt(maturity)
        x = np.linspace(lo, hi, n)
        h = x[1] - x[0]
        w = np.full(n, h)
        w[0] = w[-1] = 0.5 * h
        m = np.arange(-int(12 * sd / h), int(12 * sd / h) + 1) * h
        kernel = np.exp(-0.5 * ((m - mu) / sd) ** 2) / (sd * math.sqrt(2.0 * math.pi))
        # values on [log H, inf): the node at log H holds the limit from above, which is
        # what the trapezoidal rule needs at the end of the interval of integration
        v = np.maximum(spot * np.exp(x) - strike, 0.0)
        for _ in range(dates - 1):
            v = math.exp(-rate * dt) * np.convolve(w * v, kernel[::-1], mode="same")
        # the first step, from today's spot (log 0, inside the grid) to the first date
        first = np.exp(-0.5 * ((x - mu) / sd) ** 2) / (sd * math.sqrt(2.0 * math.pi))
        return float(math.exp(-rate * dt) * np.sum(first * w * v))

    fine, coarse = induction(nodes), induction((nodes + 1) // 2)
    return fine + (fine - coarse) / 3.0


BGK_CELLS = [
    # Broadie, Glasserman and Kou (1997), "A Continuity Correction for Discrete Barrier
    # Options", Mathematical Finance 7(4): down-and-out call, S = K = 100, sigma = 0.3,
    # r = 0.1, q = 0, T = 0.2, m = 50 monitoring dates. Discrete prices as listed in
    # REFERENCE-VALUES.md (computed, provenance C), recomputed here by backward induction.
    (85.0, 6.3222),
    (95.0, 4.9068),
    (99.5, 1.9359),
]


@pytest.mark.published
@pytest.mark.parametrize("barrier, tabulated", BGK_CELLS, ids=[f"H{h:g}" for h, _ in BGK_CELLS])
def test_discrete_monte_carlo_meets_backward_induction(barrier, tabulated):
    exact = discrete_down_and_out_call(100.0, 100.0, barrier, 0.2, 0.1, 0.3, 50)
    assert abs(exact - tabulated) <= 5e-4, exact
    product = B.DownAndOutCall(strike=100.0, barrier=barrier, maturity=0.2, monitoring=50)
    est = price(product, BlackScholes(spot=100.0, rate=0.1, dividend=0.0, vol=0.3), paths=40_000, seed=9)
    assert abs(est.value - exact) <= 5e-4 + Z_CELL * est.stderr, (est, exact)


@pytest.mark.parametrize("barrier, tabulated", BGK_CELLS, ids=[f"H{h:g}" for h, _ in BGK_CELLS])
def test_discrete_reference_meets_backward_induction(barrier, tabulated):
    """The product's reference (recursive quadrature on dates rebuilt from its terms) agrees
    with this file's own backward induction on the Broadie-Glasserman-Kou setting (the two
    share no code)."""
    product = B.DownAndOutCall(strike=100.0, barrier=barrier, maturity=0.2, monitoring=50)
    model = BlackScholes(spot=100.0, rate=0.1, dividend=0.0, vol=0.3)
    exact = discrete_down_and_out_call(100.0, 100.0, barrier, 0.2, 0.1, 0.3, 50)
    assert product.reference(model) == pytest.approx(exact, abs=2e-4)