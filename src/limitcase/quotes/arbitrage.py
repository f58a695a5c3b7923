"""No-arbitrage warnings of a quote set (the conditions in :mod:`limitcase.quotes`) and its
JSON-ready description."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from .records import ArbitrageWarning, Quote, QuoteSet

__all__ = [
    "arbitrage_warnings",
    "describe",
]


# ----------------------------------------------------------------------------------------
# no-arbitrage warnings


def arbitrage_warnings(qs: QuoteSet, rtol: float = 1e-10) -> list[ArbitrageWarning]:
    """Model-free no-arbitrage conditions broken by the quotes (see the module docstring).

    ``rtol`` (relative to the spot) absorbs floating-point rounding only.

    References
    ----------
    .. [1] R. C. Merton, "Theory of Rational Option Pricing", Bell Journal of Economics and
       Management Science 4(1), 1973 (bounds, monotonicity and convexity in the strike).
    .. [2] P. Carr and D. B. Madan, "A note on sufficient conditions for no arbitrage",
       Finance Research Letters 2(3), 2005 (spreads, butterflies and calendar spreads).
    .. [3] J. Gatheral and A. Jacquier, "Arbitrage-free SVI volatility surfaces",
       Quantitative Finance 14(1), 2014 (no calendar arbitrage: total implied variance
       non-decreasing in expiry at fixed forward moneyness; recalled from memory).
    """
    m = qs.market
    tol = rtol * m.spot
    out: list[ArbitrageWarning] = []
    for q in qs.quotes:
        pf = m.spot * math.exp(-m.dividend(q.expiry) * q.expiry)
        kd = q.strike * m.discount(q.expiry)
        if q.kind == "call":
            hi, lo, hi_text, lo_text = pf, max(pf - kd, 0.0), "S e^-qT", "max(S e^-qT - K e^-rT, 0)"
        else:
            hi, lo, hi_text, lo_text = kd, max(kd - pf, 0.0), "K e^-rT", "max(K e^-rT - S e^-qT, 0)"
        if q.price > hi + tol:
            out.append(ArbitrageWarning("bound", (q.label,), f"{q.label} (line {q.line}): price {q.price:.6g} is above "
                                                             f"the upper bound {hi_text} = {hi:.6g}"))
        elif q.price < lo - tol:
            out.append(ArbitrageWarning("bound", (q.label,), f"{q.label} (line {q.line}): price {q.price:.6g} is below "
                                                             f"the lower bound {lo_text} = {lo:.6g}"))
    groups = qs.by_expiry()
    for t, idx in groups:
        kd1 = m.discount(t)
        for kind in ("call", "put"):
            qq = sorted((qs.quotes[i] for i in idx if qs.quotes[i].kind == kind), key=lambda q: q.strike)
            for a, b in zip(qq, qq[1:]):
                dk = b.strike - a.strike
                change = b.price - a.price  # calls: <= 0, puts: >= 0
                if kind == "call" and change > tol:
                    out.append(ArbitrageWarning("strike", (a.label, b.label),
                                                f"call prices increase with the strike: {a.label} at {a.price:.6g} "
                                                f"< {b.label} at {b.price:.6g}"))
                elif kind == "put" and change < -tol:
                    out.append(ArbitrageWarning("strike", (a.label, b.label),
                                                f"put prices decrease with the strike: {a.label} at {a.price:.6g} "
                                                f"> {b.label} at {b.price:.6g}"))
                elif abs(change) > dk * kd1 + tol:
                    out.append(ArbitrageWarning("strike", (a.label, b.label),
                                                f"the {kind} spread {a.label} / {b.label} is worth {abs(change):.6g}, more "
                                                f"than its largest payoff (K2 - K1) e^-rT = {dk * kd1:.6g}"))
            for a, b, c in zip(qq, qq[1:], qq[2:]):
                lam = (c.strike - b.strike) / (c.strike - a.strike)
                chord = lam * a.price + (1.0 - lam) * c.price
                if b.price > chord + tol:
                    out.append(ArbitrageWarning("strike", (a.label, b.label, c.label),
                                                f"{kind} prices are not convex in the strike: {b.label} at {b.price:.6g} "
                                                f"is above the chord {chord:.6g} of {a.label} and {c.label} "
                                                "(a butterfly with negative price)"))
    # calendar: total implied variance at the same forward moneyness
    points: list[tuple[float, np.ndarray, np.ndarray, list[Quote]]] = []
    for t, idx in groups:
        f = m.forward(t)
        qq = [qs.quotes[i] for i in idx if qs.quotes[i].iv is not None]
        if not qq:
            continue
        by_k: dict[float, list[Quote]] = {}
        for q in qq:
            by_k.setdefault(math.log(q.strike / f), []).append(q)
        ks = np.array(sorted(by_k))
        ws = np.array([np.mean([q.iv**2 * t for q in by_k[k]]) for k in ks])  # type: ignore[operator]
        points.append((t, ks, ws, [by_k[k][0] for k in ks]))
    for (t1, k1, w1, q1), (t2, k2, w2, q2) in zip(points, points[1:]):
        if k2.size < 2:
            continue
        for k, w, q in zip(k1, w1, q1):
            if not k2[0] <= k <= k2[-1]:
                continue
            w_later = float(np.interp(k, k2, w2))
            if w_later < w * (1.0 - 1e-9):
                j = int(np.clip(np.searchsorted(k2, k), 1, k2.size - 1))
                near = (q2[j - 1].label, q2[j].label) if k2[j] != k else (q2[j].label,)
                out.append(ArbitrageWarning(
                    "calendar", (q.label,) + near,
                    f"calendar arbitrage: total implied variance {w:.6g} of {q.label} (moneyness ln(K/F) = {k:.4f}) "
                    f"is above {w_later:.6g} at the later expiry T={q2[0].expiry_text} "
                    f"(interpolated between {' and '.join(near)})"))
    return out


def describe(qs: QuoteSet) -> dict[str, Any]:
    """A JSON-ready summary of a quote set."""
    return {
        "file": qs.path,
        "quotes": len(qs.quotes),
        "expiries": [float(t) for t in qs.expiries()],
        "quoted": qs.quoted,
        "market": qs.market.to_dict(),
        "warnings": [w.to_dict() for w in qs.warnings],
    }
