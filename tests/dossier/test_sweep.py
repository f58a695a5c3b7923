"""Sweeps toward a limit (limitcase.sweep): how values are chosen, and the prices along them.

Check values: the Black-Scholes (1973) call, computed here with scipy (the formula of
Hull, Options, Futures, and Other Derivatives, ch. 15), against which the sweep of a
knock-out call converges as its barrier goes to infinity.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import norm

from limitcase import Param, ParamError, Product, Reduction
from limitcase.models import BlackScholes
from limitcase.sweep import (
    LEVEL_RATIO,
    convergence,
    plan_sweep,
    run_sweep,
    step_parameter,
    step_sweep,
    sweep_values,
)


def bs_call(s, k, t, r, q, vol):
    """Black-Scholes-Merton call (Hull, ch. 15), written out independently of limitcase."""
    d1 = (math.log(s / k) + (r - q + 0.5 * vol * vol) * t) / (vol * math.sqrt(t))
    d2 = d1 - vol * math.sqrt(t)
    return s * math.exp(-q * t) * norm.cdf(d1) - k * math.exp(-r * t) * norm.cdf(d2)


def test_bs_call_matches_hulls_worked_example():
    # Hull, BSM worked example: S=42, K=40, r=0.10, sigma=0.20, T=0.5 -> call 4.76 (from memory;
    # REFERENCE-VALUES.md lists 4.7594, recomputed there by quadrature)
    assert bs_call(42, 40, 0.5, 0.10, 0.0, 0.20) == pytest.approx(4.7594, abs=5e-5)


class Call(Product):
    strike = Param(100.0, low=0.0)
    maturity = Param(1.0, low=0.0, low_open=True)

    def dates(self):
        return np.array([self.maturity])

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] - self.strike, 0.0)

    def reference(self, model):
        return bs_call(model.spot, self.strike, self.maturity, model.rate, model.dividend, model.vol)


class KnockOut(Product):
    """Pays max(S_T - K, 0) unless S >= H at one of n dates (test product)."""

    strike = Param(100.0, low=0.0)
    barrier = Param(140.0, low=0.0, low_open=True, high=math.inf)
    monitoring = Param(12, low=1, high=1000, integer=True)
    rebate = Param(0.0, low=0.0)
    reductions = (
        Reduction("barrier_to_infinity", {"barrier": math.inf, "rebate": 0.0},
                  becomes=lambda p: Call(strike=p.strike)),
        Reduction("own_parameters", {}, becomes=lambda p: Call(strike=p.strike)),
    )

    def dates(self):
        return np.arange(1, self.monitoring + 1) / self.monitoring

    def payoff(self, obs):
        alive = np.all(obs.s < self.barrier, axis=1)
        return np.where(alive, np.maximum(obs.s[:, -1] - self.strike, 0.0), self.rebate)


def spec(**kw):
    p = Param(kw.pop("default", 1.0), **kw)
    object.__setattr__(p, "name", "x")
    return p


# --- choosing the values -------------------------------------------------------------------

def test_up_barrier_to_infinity_doubles_the_distance_from_the_spot():
    s = spec(default=140.0, low=0.0, low_open=True, high=math.inf)
    assert sweep_values(s, 140.0, math.inf, anchor=100.0) == (110, 120, 140, 180, 260, 420, 740, math.inf)


def test_down_barrier_to_zero_doubles_then_halves_what_is_left():
    s = spec(default=80.0, low=0.0)
    assert sweep_values(s, 80.0, 0.0, anchor=100.0) == (95, 90, 80, 60, 20, 10, 5, 0)


def test_fixings_halve_to_one():
    s = spec(default=12, low=1, high=10_000, integer=True)
    assert sweep_values(s, 12, 1) == (12, 6, 3, 2, 1)
    assert all(isinstance(v, int) for v in sweep_values(s, 12, 1))


def test_strike_to_zero_halves_the_distance():
    s = spec(default=100.0, low=0.0)
    assert sweep_values(s, 100.0, 0.0, points=4) == (100, 50, 25, 12.5, 0)


def test_count_to_a_far_upper_end_doubles():
    s = spec(default=52, low=1, high=10_000, integer=True)
    v = sweep_values(s, 52, 10_000, points=5)
    assert v == (52, 104, 208, 416, 832, 10_000)


@pytest.mark.parametrize("start,limit,anchor", [
    (140.0, math.inf, 100.0), (80.0, 0.0, 100.0), (100.0, 0.0, None), (0.3, 0.0, None),
    (140.0, 100.0, 100.0), (-2.0, math.inf, None), (3.0, -math.inf, None), (5.0, 7.0, None),
])
def test_values_are_monotone_in_range_and_end_at_the_limit(start, limit, anchor):
    s = spec(default=start, low=-math.inf, high=math.inf)
    v = sweep_values(s, start, limit, anchor=anchor)
    assert v[-1] == limit and len(v) >= 2
    d = np.sign(limit - start)
    assert all((b - a) * d > 0 for a, b in zip(v[:-2], v[1:-1]))
    assert all(s.contains(float(x)) for x in v)


def test_values_outside_the_range_are_dropped():
    s = spec(default=105.0, low=101.0, high=math.inf)  # the anchor side below 101 is excluded
    v = sweep_values(s, 105.0, math.inf, anchor=100.0)
    assert min(v) >= 101.0 and v[-1] == math.inf


@pytest.mark.parametrize("start,limit,points,match", [
    (-1.0, 0.0, 5, "outside"), (1.0, 2.0, 0, "points=0"),
])
def test_bad_sweep_input(start, limit, points, match):
    s = spec(default=1.0, low=0.0, high=1.0)
    with pytest.raises(ParamError, match=match):
        sweep_values(s, start, limit, points=points)


def test_plan_uses_the_spot_as_anchor_for_a_price_level_only():
    p = KnockOut()
    plan = plan_sweep(p, KnockOut.reductions[0], BlackScholes())
    assert plan.param == "barrier" and plan.anchor == 100.0
    assert plan.values[0] == 110.0 and plan.values[-1] == math.inf
    # the rebate is set by the case, not pushed to an end of its range: held at 0 throughout
    assert all(pt["rebate"] == 0.0 for pt in plan.points)
    far = plan_sweep(p.replace(barrier=100.0 * LEVEL_RATIO * 2), KnockOut.reductions[0], BlackScholes())
    assert far.anchor is None


def test_plan_refuses_a_case_that_moves_nothing():
    with pytest.raises(ParamError, match="nothing to sweep"):
        plan_sweep(KnockOut(), KnockOut.reductions[1], BlackScholes())
    sw = run_sweep(KnockOut(), KnockOut.reductions[1], paths=200, seed=1)
    assert sw.error is None and not sw.estimates and "own parameters" in sw.info


# --- pricing along the sweep ---------------------------------------------------------------

def test_sweep_prices_rise_to_the_call_on_common_paths():
    model = BlackScholes()
    sw = run_sweep(KnockOut(), KnockOut.reductions[0], model, paths=8192, seed=11)
    assert sw.error is None and sw.shared_paths
    v = [e.value for e in sw.estimates]
    # the payoff rises with the barrier on every path, and the points share their paths:
    # the estimates rise exactly, whatever the noise
    assert all(b >= a for a, b in zip(v, v[1:]))
    ref = bs_call(100.0, 100.0, 1.0, 0.05, 0.02, 0.2)
    assert sw.target == pytest.approx(ref, rel=1e-12)
    last = sw.estimates[-1]
    assert abs(last.value - ref) <= 4.0 * last.stderr  # z = 4: one test, false alarm ~6e-5
    assert v[0] < 0.1 * ref  # a barrier at 110 knocks most paths out


def test_convergence_runs_are_nested_and_settle_on_the_call():
    from limitcase.engine import case_key, evaluate

    model = BlackScholes()
    conv = convergence(Call(), model, paths=16384, seed=5)
    assert conv.paths == (1024, 2048, 4096, 8192, 16384)
    # nested: the run with n paths is the first n paths of the case's streams
    again = evaluate([Call()], model, paths=4096, seed=5, key=case_key("Call", "convergence")).estimate([1.0])
    assert conv.estimates[2] == again
    se = [e.stderr for e in conv.estimates]
    assert all(b < a for a, b in zip(se, se[1:]))
    ref = bs_call(100.0, 100.0, 1.0, 0.05, 0.02, 0.2)
    assert abs(conv.estimates[-1].value - ref) <= 4.0 * conv.estimates[-1].stderr
    assert conv.slope() < 0


def test_step_sweep_only_for_a_discretised_model():
    assert step_parameter(BlackScholes()) is None
    assert step_sweep(Call(), BlackScholes(), paths=200, seed=1) is None
    heston = pytest.importorskip("limitcase.models.heston").Heston()
    assert step_parameter(heston) == "substeps"
    st = step_sweep(Call(), heston, paths=1024, seed=1, levels=3)
    assert st.error is None and st.values == (4, 8, 16)
    assert all(e.stderr > 0 for e in st.estimates)


def test_points_the_model_cannot_price_are_dropped_not_fatal():
    class PickyKnockOut(KnockOut):
        def payoff(self, obs):
            if self.barrier < 130.0:
                raise ValueError("barrier below 130 not supported")
            return super().payoff(obs)

    sw = run_sweep(PickyKnockOut(), PickyKnockOut.reductions[0], BlackScholes(), paths=1024, seed=3)
    assert sw.error is None and not sw.shared_paths
    assert sw.plan.values[0] == 140.0 and sw.plan.values[-1] == math.inf
    assert any("below 130" in s for s in sw.plan.skipped)

    class Hopeless(KnockOut):
        def payoff(self, obs):
            if math.isfinite(self.barrier):
                raise ValueError("only the limit works")
            return super().payoff(obs)

    sw = run_sweep(Hopeless(), Hopeless.reductions[0], BlackScholes(), paths=1024, seed=3)
    assert sw.error is not None and "cannot be priced" in sw.error and not sw.estimates
