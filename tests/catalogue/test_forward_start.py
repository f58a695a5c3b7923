"""The forward-start catalogue: every declared check passes, every check catches a realistic
bug, the cliquet's closed form agrees with quadrature, a published forward-start example is
met, and bad terms are refused clearly.

A broken twin is a subclass of a shipped product whose ``payoff`` carries one bug;
``assert_caught(twin, case)`` runs only that case on it and requires it to fail.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, stats

from limitcase import BlackScholes, Heston, NoReference, ParamError, price
from limitcase.references.cliquets import cliquet_by_convolution
from limitcase.testing import assert_all_pass, assert_caught, assert_every_check_has_a_twin
from limitcase_payoffs._common import period_starts
from limitcase_payoffs.forward_start import Cliquet, ForwardStartCall, ForwardStartPut

PRODUCTS = [ForwardStartCall, ForwardStartPut, Cliquet]


@pytest.mark.parametrize("product", PRODUCTS, ids=lambda c: c.__name__)
def test_every_declared_check_passes(product):
    assert_all_pass(product, paths=20_000)


# --- broken twins ----------------------------------------------------------------------


def twin(base, bug, payoff):
    return type(f"{base.__name__}Broken", (base,), {"payoff": payoff, "__doc__": bug, "__module__": __name__})


def fixing(p, o):
    return o.s[:, 0] if p.start > 0 else o.s0


def cliquet(p, o, coupons=None, total=None):
    """The cliquet payoff with an optional wrong coupon or total rule (test side)."""
    r = o.s / period_starts(o) - 1.0
    c = np.clip(r, p.local_floor, p.local_cap) if coupons is None else coupons(p, o, r)
    s = c.sum(axis=1)
    return p.notional * (np.clip(s, p.global_floor, p.global_cap) if total is None else total(p, s))


def fs_cases(base, call):
    sign = 1.0 if call else -1.0

    def pay(strike_of):
        return lambda p, o: np.maximum(sign * (o.s[:, -1] - strike_of(p, o)), 0.0)

    return [
        (twin(base, "strike set at today's spot, not at the start", pay(lambda p, o: p.alpha * o.s0)), "closed_form"),
        (twin(base, "strike read at the first date even when the start is today",
              pay(lambda p, o: p.alpha * o.s[:, 0])), "start_today"),
        (twin(base, "strike set at today's spot, not at the start", pay(lambda p, o: p.alpha * o.s0)),
         "start_at_expiry"),
        (twin(base, "alpha added to the fixing instead of multiplying it", pay(lambda p, o: p.alpha + fixing(p, o))),
         "zero_alpha"),
        (twin(base, "written as the other side",
              lambda p, o: np.maximum(-sign * (o.s[:, -1] - p.alpha * fixing(p, o)), 0.0)),
         "decreasing_in_alpha" if call else "increasing_in_alpha"),
        (twin(base, "capped at 10", lambda p, o: np.clip(sign * (o.s[:, -1] - p.alpha * fixing(p, o)), 0.0, 10.0)),
         "convex_in_alpha"),
    ]


CLIQUET_CASES = [
    (twin(Cliquet, "global floor applied to each coupon instead of the sum",
          lambda p, o: cliquet(p, o, coupons=lambda p, o, r: np.maximum(np.clip(r, p.local_floor, p.local_cap),
                                                                         p.global_floor / p.periods))),
     "closed_form"),
    (twin(Cliquet, "local cap applied to the sum instead of each return",
          lambda p, o: cliquet(p, o, coupons=lambda p, o, r: np.maximum(r, p.local_floor),
                               total=lambda p, s: np.clip(np.minimum(s, p.local_cap), p.global_floor, p.global_cap))),
     "no_global_floor"),
    (twin(Cliquet, "returns measured from today's spot, not from the period start",
          lambda p, o: cliquet(p, o, coupons=lambda p, o, r: np.clip(o.s / o.s0 - 1.0, p.local_floor, p.local_cap))),
     "local_floor_zero"),
    (twin(Cliquet, "first period starts at the first date (today's spot forgotten)",
          lambda p, o: cliquet(p, o, coupons=lambda p, o, r: np.clip(
              o.s / np.column_stack([o.s[:, :1], o.s[:, :-1]]) - 1.0, p.local_floor, p.local_cap))),
     "one_period"),
    (twin(Cliquet, "log returns instead of simple returns",
          lambda p, o: cliquet(p, o, coupons=lambda p, o, r: np.clip(np.log1p(r), p.local_floor, p.local_cap))),
     "sum_of_returns"),
    (twin(Cliquet, "local floor read as a strike on the return",
          lambda p, o: cliquet(p, o, coupons=lambda p, o, r: np.clip(r - p.local_floor, 0.0, p.local_cap))),
     "increasing_in_local_floor"),
    (twin(Cliquet, "local cap read as a strike on the return",
          lambda p, o: cliquet(p, o, coupons=lambda p, o, r: np.maximum(r - p.local_cap, p.local_floor))),
     "increasing_in_local_cap"),
    (twin(Cliquet, "global floor read as a strike on the sum",
          lambda p, o: cliquet(p, o, total=lambda p, s: np.minimum(np.maximum(s - p.global_floor, 0.0), p.global_cap))),
     "increasing_in_global_floor"),
    (twin(Cliquet, "global cap read as a strike on the sum",
          lambda p, o: cliquet(p, o, total=lambda p, s: np.maximum(s - p.global_cap, p.global_floor))),
     "increasing_in_global_cap"),
]

TWINS = [*fs_cases(ForwardStartCall, True), *fs_cases(ForwardStartPut, False), *CLIQUET_CASES]


@pytest.mark.parametrize(
    "broken, case", TWINS, ids=[f"{b.__mro__[1].__name__}-{case}-{b.__doc__}" for b, case in TWINS]
)
def test_broken_twin_is_caught(broken, case):
    assert_caught(broken, case, paths=20_000)


def test_every_declared_case_has_a_twin():
    assert_every_check_has_a_twin(PRODUCTS, TWINS)


def test_cliquet_test_side_payoff_is_the_shipped_one():
    """The helper the twins are built from pays what the shipped cliquet pays."""

    class Obs:
        s = np.array([[101.0, 99.0, 104.0], [90.0, 95.0, 100.0]])
        s0 = 100.0
        paths = 2

    p = Cliquet(periods=3)
    np.testing.assert_allclose(cliquet(p, Obs()), p.payoff(Obs()), rtol=1e-15)
    # by hand: path 1 returns .01, -.0198, .0505 -> clipped .01, -.0198, .03 -> sum .0202;
    # path 2 returns -.1, .0556, .0526 -> -.03, .03, .03 -> .03
    np.testing.assert_allclose(p.payoff(Obs()), [100 * (0.01 + (99 / 101 - 1) + 0.03), 3.0], rtol=1e-12)


# --- closed forms and a published example --------------------------------------------------

MODEL = BlackScholes(spot=100.0, rate=0.05, dividend=0.02, vol=0.2)


def _clipped_return_by_quadrature(dt, model, floor, cap):
    """E[clip(S(t+dt)/S(t) - 1, floor, cap)] under Black-Scholes by scipy quadrature over the
    standard normal of the log-return (independent of the Black-Scholes formula)."""
    m = (model.rate - model.dividend - 0.5 * model.vol**2) * dt
    sd = model.vol * math.sqrt(dt)
    f = lambda z: min(max(math.expm1(m + sd * z), floor), cap) * stats.norm.pdf(z)  # noqa: E731
    kinks = [(math.log1p(x) - m) / sd for x in (floor, cap) if -1.0 < x < math.inf]
    value, _ = integrate.quad(f, -12.0, 12.0, points=kinks or None, epsabs=1e-12, epsrel=1e-12, limit=200)
    return value


@pytest.mark.parametrize(
    "terms",
    [
        {"global_floor": -math.inf},
        {"local_floor": -0.05, "local_cap": 0.08, "periods": 4, "maturity": 2.0, "global_floor": -math.inf},
        {"local_floor": -math.inf, "local_cap": math.inf, "global_floor": -math.inf},
        {"local_floor": 0.0, "local_cap": math.inf, "global_floor": -math.inf, "periods": 1},
    ],
)
def test_cliquet_closed_form_matches_quadrature(terms):
    p = Cliquet(**terms)
    dt = p.maturity / p.periods
    expected = p.notional * math.exp(-MODEL.rate * p.maturity) * p.periods * _clipped_return_by_quadrature(
        dt, MODEL, p.local_floor, p.local_cap
    )
    assert p.reference(MODEL) == pytest.approx(expected, rel=1e-9, abs=1e-10)


def test_cliquet_with_a_binding_global_floor_is_priced_by_convolution():
    """At the defaults the global floor 0 binds: the reference is the convolution price
    (tested against quadrature in tests/references/test_cliquets.py), strictly above the
    strip of call spreads that ignores the floor, and it refuses models other than
    Black-Scholes."""
    p = Cliquet()
    assert p.reference(MODEL) == cliquet_by_convolution(100.0, 1.0, 12, 0.05, 0.02, 0.2, -0.03, 0.03, 0.0, math.inf)
    assert p.reference(MODEL) > Cliquet(global_floor=-math.inf).reference(MODEL) + 0.1
    with pytest.raises(NoReference):
        p.reference(Heston())


def test_forward_start_meets_the_published_example():
    """Haug, The Complete Guide to Option Pricing Formulas, 2nd ed. (2007), chapter 4,
    forward start option (Rubinstein 1990): S = 60, alpha = 1.1, t = 0.25, T = 1, r = 0.08,
    b = 0.04 (q = 0.04), sigma = 0.3 -> call 4.4064 (from memory; recomputed here by
    quadrature). The Monte Carlo price of the shipped payoff must meet it."""
    model = BlackScholes(spot=60.0, rate=0.08, dividend=0.04, vol=0.3)
    p = ForwardStartCall(alpha=1.1, start=0.25, maturity=1.0)
    tau = 0.75
    m, sd = (0.04 - 0.045) * tau, 0.3 * math.sqrt(tau)
    unit, _ = integrate.quad(
        lambda z: max(math.exp(m + sd * z) - 1.1, 0.0) * stats.norm.pdf(z), (math.log(1.1) - m) / sd, 12.0,
        epsabs=1e-12, epsrel=1e-12,
    )
    recomputed = 60.0 * math.exp(-0.04 * 0.25) * math.exp(-0.08 * tau) * unit
    # one unit of the last printed digit: the exact value 4.40645 prints as 4.4064 truncated
    assert recomputed == pytest.approx(4.4064, abs=1e-4)
    assert p.reference(model) == pytest.approx(recomputed, rel=1e-10)
    est = price(p, model, paths=40_000, seed=3)
    assert abs(est.value - 4.4064) < 4.0 * est.stderr + 1e-4


# --- bad input ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    "cls, kwargs, pattern",
    [
        (ForwardStartCall, {"start": 1.5}, r"start=1\.5 is after maturity=1\.0 for ForwardStartCall.*0 <= start <= maturity"),
        (ForwardStartPut, {"alpha": -0.1}, r"alpha=-0\.1 is outside \[0, inf"),
        (Cliquet, {"local_floor": 0.05}, r"local_floor=0\.05 is above local_cap=0\.03 for Cliquet.*local_floor <= local_cap"),
        (Cliquet, {"global_floor": 0.5, "global_cap": 0.2}, r"global_floor=0\.5 is above global_cap=0\.2"),
        (Cliquet, {"periods": 0}, r"periods=0 is outside \[1, 10000\] integer"),
    ],
)
def test_bad_terms_are_refused_clearly(cls, kwargs, pattern):
    with pytest.raises(ParamError, match=pattern):
        cls(**kwargs)


def test_start_today_observes_only_maturity_and_start_at_expiry_one_date():
    np.testing.assert_array_equal(ForwardStartCall(start=0.0).dates(), [1.0])
    np.testing.assert_array_equal(ForwardStartCall(start=1.0).dates(), [1.0])
    np.testing.assert_array_equal(ForwardStartCall(start=0.25).dates(), [0.25, 1.0])
