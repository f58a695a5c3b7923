"""Floating-strike arithmetic Asians by Vecer's PDE: an independent scipy quadrature for two
fixings, the limits (ratio 0, one fixing at expiry, zero vol), put-call parity, grid
refinement, and clear refusal of bad input."""

from __future__ import annotations

import math

import pytest
from scipy import integrate
from scipy.stats import norm

from limitcase.errors import ParamError
from limitcase.references import black_scholes
from limitcase.references.arithmetic_asians import arithmetic_asian_floating

S, R, Q, V = 100.0, 0.05, 0.02, 0.2


def two_fixings(kind, k, t1, t, r=R, q=Q, v=V, s=S):
    """e^{-rT} E[(+-(S_T - k A))^+], A = (S_t1 + S_T)/2, k < 2: given S_t1 the payoff is
    (1 - k/2) times a Black-Scholes call (put) on S_T struck at (k/2) S_t1 / (1 - k/2);
    one scipy quadrature over the normal of S_t1."""
    nu, sd, tau, c = r - q - 0.5 * v * v, v * math.sqrt(t1), t - t1, 1.0 - 0.5 * k

    def inner(z):
        s1 = s * math.exp(nu * t1 + sd * z)
        return c * black_scholes(s1, 0.5 * k * s1 / c, tau, r, q, v, kind) * norm.pdf(z)

    return math.exp(-r * t1) * integrate.quad(inner, -15.0, 15.0, epsabs=1e-13, epsrel=1e-12, limit=300)[0]


@pytest.mark.parametrize("kind", ["call", "put"])
@pytest.mark.parametrize("k, t1, t, v", [(1.0, 0.4, 1.0, 0.2), (0.8, 0.5, 1.0, 0.3), (1.2, 0.25, 2.0, 0.25),
                                         (1.0, 0.9, 1.0, 0.4)])
def test_two_fixings_match_quadrature(kind, k, t1, t, v):
    """Stated accuracy: 1e-6 relative, or 1e-8 per unit of spot near zero."""
    expected = two_fixings(kind, k, t1, t, v=v)
    got = arithmetic_asian_floating(S, k, [t1, t], t, R, Q, v, kind)
    assert abs(got - expected) <= 1e-6 * expected + 1e-8 * S


def test_ratio_zero_is_the_prepaid_forward_or_nothing():
    fix = [0.25, 0.5, 0.75, 1.0]
    assert arithmetic_asian_floating(S, 0.0, fix, 1.0, R, Q, V, "call") == pytest.approx(S * math.exp(-Q), rel=1e-12)
    assert abs(arithmetic_asian_floating(S, 0.0, fix, 1.0, R, Q, V, "put")) <= 1e-8 * S


@pytest.mark.parametrize("k", [0.7, 1.0, 1.3])
def test_one_fixing_at_expiry_pays_a_fixed_share_of_the_asset(k):
    """A = S_T: the call pays (1 - k)^+ S_T, the put (k - 1)^+ S_T, worth that share of S0 e^{-qT}."""
    asset = S * math.exp(-Q)
    assert arithmetic_asian_floating(S, k, [1.0], 1.0, R, Q, V, "call") == pytest.approx(
        max(1.0 - k, 0.0) * asset, rel=1e-9, abs=1e-8 * S)
    assert arithmetic_asian_floating(S, k, [1.0], 1.0, R, Q, V, "put") == pytest.approx(
        max(k - 1.0, 0.0) * asset, rel=1e-9, abs=1e-8 * S)


def test_put_call_parity_and_refinement_at_monthly_fixings():
    fix = [i / 12 for i in range(1, 13)]
    call = arithmetic_asian_floating(S, 1.0, fix, 1.0, R, Q, V, "call")
    put = arithmetic_asian_floating(S, 1.0, fix, 1.0, R, Q, V, "put")
    mean_forward = sum(S * math.exp((R - Q) * t) for t in fix) / 12
    assert call - put == pytest.approx(S * math.exp(-Q) - math.exp(-R) * mean_forward, rel=1e-12)
    fine = arithmetic_asian_floating(S, 1.0, fix, 1.0, R, Q, V, "call", resolution=6)
    assert abs(call - fine) <= 1e-6 * fine


def test_zero_vol_is_the_discounted_intrinsic_value():
    fix = [0.5, 1.0]
    mean_forward = S * (math.exp(0.03 * 0.5) + math.exp(0.03)) / 2
    expected = math.exp(-R) * max(S * math.exp(0.03) - 0.9 * mean_forward, 0.0)
    assert arithmetic_asian_floating(S, 0.9, fix, 1.0, R, Q, 0.0, "call") == pytest.approx(expected, rel=1e-13)


@pytest.mark.parametrize(
    "args, pattern",
    [
        ((S, -0.5, [1.0], 1.0, R, Q, V), r"ratio=-0\.5 is outside the allowed range .* arithmetic_asian_floating"),
        ((S, 1.0, [0.5, 1.5], 1.0, R, Q, V), r"fixing_times\[-1\]=1\.5 is after maturity=1\.0"),
        ((S, 1.0, [1.0, 0.5], 1.0, R, Q, V), r"non-decreasing"),
        ((-1.0, 1.0, [1.0], 1.0, R, Q, V), r"spot=-1\.0 is outside"),
    ],
)
def test_bad_input_is_refused_clearly(args, pattern):
    with pytest.raises(ParamError, match=pattern):
        arithmetic_asian_floating(*args)
