"""The calibration's prices: Black-Scholes vega (the fit's weights) and the Heston surface
of a quote set, priced for many parameter sets at once on the reference library's one-pass
grid (:class:`limitcase.references.heston.HestonGrid`: the same characteristic function and
quadrature as :func:`limitcase.references.heston_price`, without refinement)."""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np
from scipy.stats import norm

from ..quotes import QuoteSet
from ..references.heston import HestonGrid, heston_lewis_prices, heston_log_cf

__all__ = ["bs_vega", "heston_lewis_prices", "heston_log_cf", "HestonSurface"]


def bs_vega(spot: float, strike: Any, maturity: float, rate: float, dividend: float, vol: Any) -> np.ndarray:
    r"""Black-Scholes vega :math:`\partial c/\partial\sigma = S e^{-qT} n(d_1)\sqrt T`.

    With :math:`d_1 = [\ln(S/K) + (r - q + \sigma^2/2)T]/(\sigma\sqrt T)`; the same for calls
    and puts (Hull, *Options, Futures, and Other Derivatives*, chapter on the Greek letters).
    """
    k = np.asarray(strike, dtype=float)
    v = np.maximum(np.asarray(vol, dtype=float), 1e-12)
    srt = v * math.sqrt(maturity)
    d1 = (np.log(spot / k) + (rate - dividend) * maturity) / srt + 0.5 * srt
    return spot * math.exp(-dividend * maturity) * norm.pdf(d1) * math.sqrt(maturity)


class HestonSurface:
    """Quotes grouped by expiry, priced together for one or many parameter vectors."""

    def __init__(self, spot: float, groups: Sequence[tuple[float, float, float, np.ndarray, np.ndarray, np.ndarray]], n: int) -> None:
        self.spot = spot
        self.groups = list(groups)  # (T, r, q, strikes, calls, positions)
        self.n = n
        self.logm = [np.log(spot / k) + (r - q) * t for t, r, q, k, _, _ in self.groups]
        self.k_max = [float(np.max(np.abs(lm))) for lm in self.logm]

    @classmethod
    def of(cls, qs: QuoteSet, chosen: np.ndarray) -> "HestonSurface":
        m = qs.market
        groups = []
        for t, _ in qs.by_expiry():
            sel = np.array([j for j, i in enumerate(chosen) if qs.quotes[i].expiry == t], dtype=int)
            if sel.size:
                k = np.array([qs.quotes[chosen[j]].strike for j in sel])
                calls = np.array([qs.quotes[chosen[j]].kind == "call" for j in sel])
                groups.append((t, m.rate(t), m.dividend(t), k, calls, sel))
        return cls(m.spot, groups, chosen.size)

    def grid(self, params: Sequence[float]) -> HestonGrid:
        return HestonGrid([g[0] for g in self.groups], self.k_max, params)

    def prices(self, params: Any, grid: HestonGrid | None = None) -> np.ndarray:
        """Prices for parameter rows ``params`` (shape (5,) or (P, 5)) on ``grid`` (default:
        the grid of the first row) -> (n,) or (P, n)."""
        p = np.asarray(params, dtype=float)
        rows = np.atleast_2d(p)
        grid = grid if grid is not None else self.grid(rows[0])
        cf = grid.cf_over_pole(rows)
        out = np.empty((rows.shape[0], self.n))
        for j, (t, r, q, k, calls, sel) in enumerate(self.groups):
            call = grid.calls(j, self.spot, k, r, q, cf)  # (P, strikes)
            pf = self.spot * math.exp(-q * t)
            out[:, sel] = np.where(calls, call, call - pf + k * math.exp(-r * t))
        return out[0] if p.ndim == 1 else out
