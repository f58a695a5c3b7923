"""Discretely monitored lookbacks by Lindley's recursion on the running extreme: one date
against the Black-Scholes formula, two dates against an independent scipy quadrature,
refinement of the quadrature panels, the continuous limit from below, and bad input."""

from __future__ import annotations

import math

import pytest
from scipy import integrate
from scipy.stats import norm

from limitcase.errors import ParamError
from limitcase.references import black_scholes, lookback_fixed, lookback_floating
from limitcase.references.discrete_lookbacks import discrete_lookback

S, R, Q, V = 100.0, 0.05, 0.02, 0.2
KINDS = [("floating_call", 0.0), ("floating_put", 0.0), ("fixed_call", 105.0), ("fixed_put", 95.0),
         ("fixed_call", 95.0), ("fixed_put", 105.0)]


def one_date(kind, k, t=1.0):
    """Extreme of S0 and S(T): the at-the-money option, or the European option struck
    beyond S0 plus the discounted intrinsic value (Black-Scholes formula)."""
    df = math.exp(-R * t)
    return {
        "floating_call": lambda: black_scholes(S, S, t, R, Q, V, "call"),
        "floating_put": lambda: black_scholes(S, S, t, R, Q, V, "put"),
        "fixed_call": lambda: black_scholes(S, max(k, S), t, R, Q, V, "call") + df * max(S - k, 0.0),
        "fixed_put": lambda: black_scholes(S, min(k, S), t, R, Q, V, "put") + df * max(k - S, 0.0),
    }[kind]()


def two_dates(kind, k, t1=0.5, t=1.0):
    """Dates t1 and T: given S(t1), the last step is a Black-Scholes option on S(T) struck
    at the running extreme (or beyond the strike); one scipy quadrature over S(t1)."""
    nu, sd, tau = R - Q - 0.5 * V * V, V * math.sqrt(t1), t - t1

    def inner(z):
        s1 = S * math.exp(nu * t1 + sd * z)
        lo, hi = min(S, s1), max(S, s1)
        if kind == "floating_call":
            x = black_scholes(s1, lo, tau, R, Q, V, "call")
        elif kind == "floating_put":
            x = black_scholes(s1, hi, tau, R, Q, V, "put")
        elif kind == "fixed_call":
            x = math.exp(-R * tau) * max(hi - k, 0.0) + black_scholes(s1, max(hi, k), tau, R, Q, V, "call")
        else:
            x = math.exp(-R * tau) * max(k - lo, 0.0) + black_scholes(s1, min(lo, k), tau, R, Q, V, "put")
        return x * norm.pdf(z)

    kinks = sorted({-nu * t1 / sd, (math.log(k / S) - nu * t1) / sd if k > 0 else 0.0})
    return math.exp(-R * t1) * integrate.quad(inner, -15.0, 15.0, points=kinks, epsabs=1e-13, epsrel=1e-12,
                                              limit=400)[0]


@pytest.mark.parametrize("kind, k", KINDS)
def test_one_and_two_dates_match_independent_computations(kind, k):
    """Stated accuracy 1e-8 of the spot; measured within 1e-13."""
    assert abs(discrete_lookback(S, k, 1.0, 1, R, Q, V, kind) - one_date(kind, k)) <= 1e-8 * S
    assert abs(discrete_lookback(S, k, 1.0, 2, R, Q, V, kind) - two_dates(kind, k)) <= 1e-8 * S


@pytest.mark.parametrize("kind, k", KINDS[:4])
@pytest.mark.parametrize("n", [12, 24])
def test_finer_panels_move_the_price_by_less_than_the_stated_accuracy(kind, k, n):
    a = discrete_lookback(S, k, 1.0, n, R, Q, V, kind)
    b = discrete_lookback(S, k, 1.0, n, R, Q, V, kind, resolution=2)
    assert abs(a - b) <= 1e-8 * S


@pytest.mark.parametrize("kind, k", KINDS[:4])
def test_more_dates_approach_the_continuous_closed_form_from_below(kind, k):
    """The extreme over more (nested) dates only widens, and stays inside the continuous
    extreme (Goldman-Sosin-Gatto, Conze-Viswanathan closed forms); the gap shrinks like
    1/sqrt(n) (Broadie, Glasserman and Kou 1999)."""
    cont = (lookback_floating(S, 1.0, R, Q, V, kind.split("_")[1]) if kind.startswith("floating")
            else lookback_fixed(S, k, 1.0, R, Q, V, kind.split("_")[1]))
    prices = [discrete_lookback(S, k, 1.0, n, R, Q, V, kind) for n in (4, 16, 64)]
    assert all(a < b for a, b in zip(prices, prices[1:]))
    assert prices[-1] < cont
    gaps = [cont - p for p in prices]
    for g0, g1 in zip(gaps, gaps[1:]):  # quadrupling n halves the gap, roughly
        assert 0.35 < g1 / g0 < 0.65


@pytest.mark.parametrize(
    "args, pattern",
    [
        ((S, 0.0, 1.0, 12, R, Q, V, "floating"), r"kind='floating' is not one of"),
        ((S, 0.0, 1.0, 0, R, Q, V, "floating_call"), r"observations=0 is not a whole number >= 1"),
        ((S, -5.0, 1.0, 12, R, Q, V, "fixed_call"), r"strike=-5\.0 is outside the allowed range"),
        ((S, 0.0, 1.0, 12, R, Q, 0.0, "floating_call"), r"vol=0\.0 is outside the allowed range"),
        ((S, 0.0, 1.0, 5000, R, Q, V, "floating_call"), r"observations=5000 needs .* quadrature nodes"),
    ],
)
def test_bad_input_is_refused_clearly(args, pattern):
    with pytest.raises(ParamError, match=pattern):
        discrete_lookback(*args)
