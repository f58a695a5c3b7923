"""Cliquets with binding global clips by numerical convolution: an independent scipy
quadrature for one and two periods, the strip of call spreads where the global clips cannot
bind, refinement of the lattice, the degenerate limits and clear refusal of bad terms."""

from __future__ import annotations

import math

import pytest
from scipy import integrate
from scipy.stats import norm

from limitcase.errors import ParamError
from limitcase.references import black_scholes
from limitcase.references.cliquets import cliquet_by_convolution

INF = math.inf


def _clip(x, a, b):
    return min(max(x, a), b)


def _law(t, n, r, q, v):
    dt = t / n
    return (r - q - 0.5 * v * v) * dt, v * math.sqrt(dt)


def _kink(x, m, s):
    """Where a return equals x, in units of the standard normal (None if never)."""
    return (math.log1p(x) - m) / s if -1.0 < x < INF else None


def one_period_by_quadrature(t, r, q, v, lf, lc, gf, gc):
    """e^{-rT} E[clip(clip(R, lf, lc), gf, gc)] by one scipy quadrature over the normal."""
    m, s = _law(t, 1, r, q, v)
    f = lambda z: _clip(_clip(math.expm1(m + s * z), lf, lc), gf, gc) * norm.pdf(z)  # noqa: E731
    pts = sorted(k for x in (lf, lc, gf, gc) if (k := _kink(x, m, s)) is not None and -12 < k < 12)
    return math.exp(-r * t) * integrate.quad(f, -12.0, 12.0, points=pts or None, epsabs=1e-13, epsrel=1e-12,
                                             limit=400)[0]


def _mean_clipped(m, s, a, b):
    """E[clip(R, a, b)], R = exp(m + sZ) - 1, a <= b, from the log-normal partial means."""
    def call(k):  # E[(R - k)^+]
        if k <= -1.0:
            return math.exp(m + 0.5 * s * s) - 1.0 - k
        if k == INF:
            return 0.0
        d = (m - math.log1p(k)) / s
        return math.exp(m + 0.5 * s * s) * norm.cdf(d + s) - (1.0 + k) * norm.cdf(d)
    if a == -INF:
        return -1.0 + call(-1.0) - call(b) if b < INF else math.exp(m + 0.5 * s * s) - 1.0
    return a + call(a) - call(b)


def two_periods_by_quadrature(t, r, q, v, lf, lc, gf, gc):
    """e^{-rT} E[clip(X1 + X2, gf, gc)], X = clip(R, lf, lc): scipy quadrature over the
    first normal; given X1 = x, clip(x + X2, gf, gc) = x + clip(R2, A, B) with the two
    clips merged into one, whose mean is a difference of log-normal partial means."""
    m, s = _law(t, 2, r, q, v)
    local = [k for y in (lf, lc) if (k := _kink(y, m, s)) is not None]

    def inner(z1):
        x1 = _clip(math.expm1(m + s * z1), lf, lc)
        a, b = gf - x1, gc - x1
        if lc <= a:
            return x1 + a
        if lf >= b:
            return x1 + b
        return x1 + _mean_clipped(m, s, max(lf, a), min(lc, b))

    pts = local + [k for g in (gf, gc) for y in (g - lf, g - lc) if (k := _kink(y, m, s)) is not None]
    pts = sorted(p for p in pts if -12 < p < 12)
    val = integrate.quad(lambda z: inner(z) * norm.pdf(z), -12.0, 12.0, points=pts or None,
                         epsabs=1e-13, epsrel=1e-12, limit=400)[0]
    return math.exp(-r * t) * val


CASES_TWO = [
    # t, r, q, v, lf, lc, gf, gc
    (1.0, 0.05, 0.02, 0.2, -0.03, 0.03, 0.0, INF),
    (2.0, 0.03, 0.0, 0.3, -0.10, 0.15, 0.02, 0.2),
    (0.5, 0.0, 0.01, 0.4, -INF, 0.2, -0.05, 0.1),
    (1.0, 0.05, 0.02, 0.25, -0.2, INF, 0.0, 0.3),
]


@pytest.mark.parametrize("terms", CASES_TWO)
def test_two_periods_match_nested_quadrature(terms):
    """Stated accuracy 1e-9 per unit of notional; measured within 1e-10."""
    t, r, q, v, lf, lc, gf, gc = terms
    expected = two_periods_by_quadrature(t, r, q, v, lf, lc, gf, gc)
    got = cliquet_by_convolution(1.0, t, 2, r, q, v, lf, lc, gf, gc)
    assert abs(got - expected) <= 1e-9


@pytest.mark.parametrize("terms", CASES_TWO)
def test_one_period_matches_quadrature(terms):
    t, r, q, v, lf, lc, gf, gc = terms
    expected = one_period_by_quadrature(t, r, q, v, lf, lc, gf, gc)
    assert abs(cliquet_by_convolution(1.0, t, 1, r, q, v, lf, lc, gf, gc) - expected) <= 1e-9


def strip_of_call_spreads(t, n, r, q, v, lf, lc):
    """No binding global clip: sum of n forward-start call spreads (Rubinstein), written
    with the Black-Scholes formula of spot 1."""
    dt = t / n
    f = max(lf, -1.0)
    call = lambda k: 0.0 if k == INF else math.exp(r * dt) * black_scholes(1.0, k, dt, r, q, v, "call")  # noqa: E731
    return math.exp(-r * t) * n * (f + call(1.0 + f) - call(1.0 + lc))


@pytest.mark.parametrize("n, lf, lc", [(12, -0.03, 0.03), (4, -0.05, 0.08), (52, 0.0, 0.01), (12, -INF, INF)])
def test_global_clips_that_cannot_bind_give_the_strip_of_call_spreads(n, lf, lc):
    expected = strip_of_call_spreads(1.0, n, 0.05, 0.02, 0.2, lf, lc)
    for gf, gc in ((-INF, INF), (n * max(lf, -1.0) - 0.01, n * lc + 0.01 if lc < INF else INF)):
        got = cliquet_by_convolution(1.0, 1.0, n, 0.05, 0.02, 0.2, lf, lc, gf, gc)
        assert abs(got - expected) <= 1e-9


def test_lattice_refinement_moves_the_default_price_by_less_than_the_stated_accuracy():
    """At the catalogue's defaults (12 monthly periods, +-3% local clips, global floor 0)."""
    args = (1.0, 1.0, 12, 0.05, 0.02, 0.2, -0.03, 0.03, 0.0, INF)
    coarse, fine = cliquet_by_convolution(*args), cliquet_by_convolution(*args, resolution=4)
    assert abs(coarse - fine) <= 1e-10
    # the global floor binds: the price is above the strip of call spreads, strictly
    assert coarse > strip_of_call_spreads(1.0, 12, 0.05, 0.02, 0.2, -0.03, 0.03) + 1e-3


def test_global_floor_equal_to_cap_pays_it_and_zero_vol_is_deterministic():
    assert cliquet_by_convolution(100.0, 1.0, 12, 0.05, 0.02, 0.2, -0.03, 0.03, 0.1, 0.1) == pytest.approx(
        100.0 * 0.1 * math.exp(-0.05), rel=1e-13)
    # zero vol: each return is e^{(r-q) dt} - 1 = 0.0025..., 12 of them clipped globally at 0.02
    got = cliquet_by_convolution(1.0, 1.0, 12, 0.05, 0.02, 0.0, -0.03, 0.03, 0.0, 0.02)
    assert got == pytest.approx(0.02 * math.exp(-0.05), rel=1e-13)


def test_many_periods_are_priced_without_wrap_round():
    """1000 periods: still a probability law (the unclipped-cap version equals the strip)."""
    expected = strip_of_call_spreads(1.0, 1000, 0.05, 0.02, 0.2, -0.03, 0.03)
    got = cliquet_by_convolution(1.0, 1.0, 1000, 0.05, 0.02, 0.2, -0.03, 0.03, -INF, INF)
    assert abs(got - expected) <= 1e-9


@pytest.mark.parametrize(
    "kwargs, pattern",
    [
        ({"periods": 0}, r"periods=0 is not a whole number >= 1 in cliquet_by_convolution"),
        ({"vol": -0.1}, r"vol=-0\.1 is outside the allowed range"),
        ({"local_floor": 0.1}, r"local_floor=0\.1 and local_cap=0\.03 .* do not make a range"),
        ({"global_floor": INF}, r"global_floor=inf and global_cap=inf .* do not make a range"),
        ({"maturity": 0.0}, r"maturity=0\.0 is outside the allowed range"),
    ],
)
def test_bad_terms_are_refused_clearly(kwargs, pattern):
    args = dict(notional=1.0, maturity=1.0, periods=12, rate=0.05, dividend=0.02, vol=0.2, local_floor=-0.03,
                local_cap=0.03, global_floor=0.0, global_cap=INF)
    args.update(kwargs)
    with pytest.raises(ParamError, match=pattern):
        cliquet_by_convolution(**args)
