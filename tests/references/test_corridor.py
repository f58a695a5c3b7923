"""Range accrual reference: each fixing's corridor probability against a scipy quadrature of
the log-normal density, and the limits (whole line, empty corridor, zero vol)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.stats import norm

from limitcase.errors import ParamError
from limitcase.references import cash_or_nothing, range_accrual


def test_matches_scipy_quadrature_on_uneven_fixings():
    s, lo, hi, r, q, v, c = 100.0, 92.0, 111.0, 0.04, 0.01, 0.27, 5.0
    fix = np.array([0.05, 0.2, 0.21, 0.6, 0.95])
    T = 1.1
    probs = []
    for t in fix:
        nu, sd = r - q - 0.5 * v * v, v * math.sqrt(t)
        dens = lambda x: norm.pdf(x, nu * t, sd)
        p, _ = integrate.quad(dens, math.log(lo / s), math.log(hi / s), epsabs=1e-14, epsrel=1e-13)
        probs.append(p)
    want = c * math.exp(-r * T) * np.mean(probs)
    assert range_accrual(s, lo, hi, fix, T, r, q, v, c) == pytest.approx(want, abs=1e-12)


def test_one_fixing_is_a_pair_of_cash_digitals():
    got = range_accrual(100.0, 95.0, 108.0, [0.7], 0.7, 0.05, 0.02, 0.3, 4.0)
    want = cash_or_nothing(100.0, 95.0, 0.7, 0.05, 0.02, 0.3, 4.0, "call") - cash_or_nothing(
        100.0, 108.0, 0.7, 0.05, 0.02, 0.3, 4.0, "call")
    assert got == pytest.approx(want, abs=1e-12)


def test_limits():
    fix = np.linspace(0.1, 1.0, 10)
    assert range_accrual(100.0, 0.0, math.inf, fix, 1.0, 0.05, 0.0, 0.2, 3.0) == pytest.approx(3.0 * math.exp(-0.05))
    assert range_accrual(100.0, 104.0, 104.0, fix, 1.0, 0.05, 0.0, 0.2, 3.0) == 0.0
    # zero vol: the forward 100 e^{0.03 t} is in [100, 102] for t <= ln(1.02)/0.03 = 0.66
    got = range_accrual(100.0, 100.0, 102.0, fix, 1.0, 0.05, 0.02, 0.0, 1.0)
    assert got == pytest.approx(math.exp(-0.05) * 6 / 10)
    # a fixing today reads the spot
    assert range_accrual(100.0, 99.0, 101.0, [0.0], 1.0, 0.05, 0.0, 0.2) == pytest.approx(math.exp(-0.05))


def test_bad_input():
    with pytest.raises(ParamError, match="upper"):
        range_accrual(100.0, 110.0, 90.0, [0.5], 1.0, 0.05, 0.0, 0.2)
    with pytest.raises(ParamError, match="payment_time"):
        range_accrual(100.0, 90.0, 110.0, [0.5, 1.5], 1.0, 0.05, 0.0, 0.2)
