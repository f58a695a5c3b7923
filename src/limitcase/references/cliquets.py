r"""Cliquets with locally and globally clipped returns, by numerical convolution.

A cliquet pays :math:`N\,\mathrm{clip}(\sum_{i=1}^n \mathrm{clip}(R_i, f, c), F, C)` at T,
:math:`R_i = S(t_i)/S(t_{i-1}) - 1` over n equal periods. Under Black-Scholes the returns are
independent and identically distributed, so the sum of the locally clipped returns has the
n-fold convolution of one clipped return's law: two atoms (at f and at c) and a continuous
part between. That law is put on a lattice, raised to the n-th power by FFT and the global
clip is integrated against it exactly on the lattice.

Where the global floor and cap cannot bind, the price is a strip of call spreads on the
returns (Rubinstein 1990); this module is for the case where they can. It imports only
numpy, scipy, math and :mod:`limitcase.errors`.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from scipy import fft as sfft
from scipy.special import ndtr

from limitcase.references._inputs import _num
from limitcase.errors import ParamError


def _arg(name: str, value: Any, **checks: Any) -> float:
    """An argument of :func:`cliquet_by_convolution` checked by the package's one input check."""
    return _num(name, value, "cliquet_by_convolution", **checks)

__all__ = ["cliquet_by_convolution", "CLIQUET_TAIL_Z"]

CLIQUET_TAIL_Z = 10.0
"""Returns beyond this many standard deviations of the log-return are clipped to the
quantile there (where a local floor or cap is absent or further out); the price moves by
at most ``N n`` times ``E|R - clip(R, quantiles)|``, below 1e-20 per unit of notional."""

_BUDGET = 1 << 20
"""Lattice points of the law of the sum at resolution 1."""


def _return_law(m: float, s: float, lo: float, hi: float, cells: int) -> np.ndarray:
    """Law of clip(R, lo, hi), R = exp(m + s Z) - 1, on the lattice lo + j h (j = 0..cells):
    the atoms at lo and hi sit on the end points, and the mass of each cell is split between
    its two end points so that the cell's mass and mean are kept exactly."""
    x = np.linspace(lo, hi, cells + 1)
    h = (hi - lo) / cells
    z = (np.log1p(x) - m) / s
    cdf = ndtr(z)
    upper = ndtr(z - s)  # E[exp(m + s Z) 1{Z <= z}] = exp(m + s^2/2) Phi(z - s)
    mass = np.diff(cdf)
    partial = math.exp(m + 0.5 * s * s) * np.diff(upper) - mass  # E[R 1{cell}]
    above = partial - x[:-1] * mass  # E[(R - x_j) 1{cell}], in [0, h mass]
    above = np.clip(above, 0.0, h * mass)
    law = np.zeros(cells + 1)
    law[:-1] += mass - above / h
    law[1:] += above / h
    law[0] += cdf[0]  # P(R <= lo)
    law[-1] += 1.0 - cdf[-1]  # P(R >= hi)
    return law


def cliquet_by_convolution(
    notional: Any,
    maturity: Any,
    periods: Any,
    rate: Any,
    dividend: Any,
    vol: Any,
    local_floor: Any,
    local_cap: Any,
    global_floor: Any,
    global_cap: Any,
    *,
    resolution: int = 1,
) -> float:
    r"""Price of a cliquet on n equal periods with local and global floors and caps.

    Payoff at T: :math:`N\,\mathrm{clip}(\sum_{i=1}^n \mathrm{clip}(R_i, f, c), F, C)`,
    :math:`R_i = S(iT/n)/S((i-1)T/n) - 1`, :math:`\mathrm{clip}(x, a, b) = \min(\max(x, a), b)`;
    floors may be ``-inf`` and caps ``inf`` (absent).

    Parameters
    ----------
    notional, maturity, periods : the contract's terms (N >= 0, T > 0, n >= 1 whole).
    rate, dividend, vol : Black-Scholes inputs (continuous rate, dividend yield, volatility).
    local_floor, local_cap, global_floor, global_cap : the clips (floor <= cap).
    resolution : int, keyword-only
        Lattice size multiplier: about ``2**20 * resolution`` points carry the law of the sum.

    Returns
    -------
    float

    Notes
    -----
    With :math:`m = (r - q - \sigma^2/2)T/n` and :math:`s = \sigma\sqrt{T/n}`, each return is
    :math:`e^{m + sZ} - 1`. Its clipped value X has atoms :math:`P(R \le f)` at f and
    :math:`P(R \ge c)` at c and a density between. X is put on the lattice
    :math:`f + jh` by splitting each cell's probability between the cell's end points so
    that its mass and its mean are exact (both from normal distribution functions); the atoms
    fall on lattice points. The sum of n independent copies then lives on
    :math:`nf + jh`; its law is the n-fold convolution, computed as the n-th power of the
    discrete Fourier transform on a grid long enough that nothing wraps round. The price is
    :math:`N e^{-rT}\sum_j p_j\,\mathrm{clip}(nf + jh, F, C)`. The lattice keeps every mean
    exact and adds at most :math:`h^2/4` of variance per period, so the error is
    :math:`O(n h^2)` times the density of the sum near F and C.

    Accuracy: stated 1e-9 relative to the notional (absolute, per unit of N). Measured:
    resolution 1 against 4 agrees within 1e-12 at the catalogue's defaults; two periods
    against an independent scipy double quadrature within 1e-10; a global clip that cannot
    bind against the strip of call spreads (Rubinstein 1990) within 1e-11.

    References
    ----------
    M. Rubinstein, "Pay now, choose later", Risk 4 (1991) (forward-start options, the
    building block of each period); the convolution of i.i.d. laws by the discrete Fourier
    transform is a standard numerical method (e.g. W. Press et al., Numerical Recipes,
    3rd ed. (2007), section 13.1).
    """
    func = "cliquet_by_convolution"
    n_val = notional
    notional = _arg("notional", n_val, low=0.0, fix="a notional is an amount >= 0")
    maturity = _arg("maturity", maturity, low=0.0, low_open=True, fix="maturity is a time in years > 0")
    if isinstance(periods, bool) or not float(periods).is_integer() or periods < 1:
        raise ParamError(f"periods={periods!r} is not a whole number >= 1 in {func}; pass 1, 2, ...")
    n = int(periods)
    rate = _arg("rate", rate, fix="pass a finite continuously compounded rate")
    dividend = _arg("dividend", dividend, fix="pass a finite continuous dividend yield")
    vol = _arg("vol", vol, low=0.0, fix="a volatility is >= 0")
    lf = _arg("local_floor", local_floor, allow_inf=True, fix="a floor is a number or -inf")
    lc = _arg("local_cap", local_cap, allow_inf=True, fix="a cap is a number or inf")
    gf = _arg("global_floor", global_floor, allow_inf=True, fix="a floor is a number or -inf")
    gc = _arg("global_cap", global_cap, allow_inf=True, fix="a cap is a number or inf")
    for low, high, a, b in (("local_floor", "local_cap", lf, lc), ("global_floor", "global_cap", gf, gc)):
        if a > b or a == math.inf or b == -math.inf:
            raise ParamError(f"{low}={a!r} and {high}={b!r} in {func} do not make a range; pass {low} <= {high}, "
                             f"{low} < inf and {high} > -inf")
    if isinstance(resolution, bool) or not isinstance(resolution, (int, np.integer)) or resolution < 1:
        raise ParamError(f"resolution={resolution!r} is not an integer >= 1 in {func}; pass 1, 2, ...")

    dt = maturity / n
    m = (rate - dividend - 0.5 * vol * vol) * dt
    s = vol * math.sqrt(dt)
    df_notional = notional * math.exp(-rate * maturity)
    f = max(lf, -1.0)  # a return is never below -1
    if s == 0.0 or f == lc:
        x = min(max(math.expm1(m), f), lc)
        return df_notional * min(max(n * x, gf), gc)
    lo = max(f, math.expm1(m - CLIQUET_TAIL_Z * s))
    hi = min(lc, math.expm1(m + CLIQUET_TAIL_Z * s))
    if lo >= hi:  # the floor is above (or the cap below) virtually every return
        x = lo if f >= hi else hi
        return df_notional * min(max(n * x, gf), gc)
    cells = max(int(_BUDGET * resolution) // n, 2)
    law = _return_law(m, s, lo, hi, cells)
    size = n * cells + 1
    length = sfft.next_fast_len(size, real=True)
    total = sfft.irfft(sfft.rfft(law, length) ** n, length)[:size]
    levels = n * lo + (hi - lo) / cells * np.arange(size)
    return df_notional * float(np.dot(total, np.clip(levels, gf, gc)))
