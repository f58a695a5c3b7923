"""An implied-volatility surface without static arbitrage, and the local volatility it implies.

Each expiry is fitted with the raw SVI parameterisation of Gatheral (2004), in total
implied variance ``w = sigma_imp^2 T`` against log-moneyness ``k = log(K / F(T))``:

    w(k) = a + b (rho (k - m) + sqrt((k - m)^2 + s^2)),

with ``b >= 0``, ``|rho| < 1``, ``s > 0``, a non-negative minimum ``a + b s sqrt(1 - rho^2)``
and Lee's (2004) moment bound on the wings, ``b (1 + |rho|) <= 2``.

Static arbitrage is refused, not repaired:

* butterfly: the density implied by a slice is ``g(k) n(d_-) / sqrt(w)`` with Durrleman's
  function (Gatheral and Jacquier 2014, "Arbitrage-free SVI volatility surfaces", Lemma 2.2)

      g(k) = (1 - k w'/(2w))^2 - w'^2/4 (1/w + 1/4) + w''/2,

  and a slice is free of butterfly arbitrage exactly when ``g >= 0``;
* calendar: total variance at fixed log-moneyness must not decrease with the expiry
  (Gatheral and Jacquier 2014, Lemma 2.1).

Between expiries the total variance is interpolated linearly in ``T`` at fixed ``k``, which
keeps ``dw/dT >= 0`` wherever the slices are calendar-free; before the first expiry the
implied volatility at fixed ``k`` is held flat (``w = T w_1 / T_1``), and after the last one
likewise (``w = T w_N / T_N``).

The local variance is Dupire's (1994) formula written in total implied variance
(Gatheral 2006, "The Volatility Surface", eq. 1.10):

    sigma_loc^2(k, T) = (dw/dT) / (1 - (k/w) w' + 1/4 (-1/4 - 1/w + k^2/w^2) w'^2 + w''/2),

with the ``k``-derivatives of SVI in closed form. The surface carries one flat rate and
dividend yield, those the local-volatility model simulates with.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Iterable, Sequence

import numpy as np
from scipy.optimize import least_squares

from .errors import InputError

__all__ = [
    "SviSlice",
    "VarianceSurface",
    "SurfaceArbitrage",
    "fit_svi",
    "surface_from_quotes",
]

WING_BOUND = 2.0
"""Lee (2004): the total variance grows at most like ``2 |k|`` in the wings."""

ARBITRAGE_TOL = 1e-9
"""Slack in the arbitrage tests, far below any fitting error: a surface is refused when
``g(k) < -ARBITRAGE_TOL`` or total variance drops by more than this between expiries."""

FAR_HORIZON = 100.0
"""Years up to which a surface's extrapolation past its last expiry is checked for a local
volatility (with 100 times the last expiry when that is longer)."""


class SurfaceArbitrage(InputError):
    """The implied-volatility surface admits static arbitrage (the message says where)."""


@dataclass(frozen=True, slots=True)
class SviSlice:
    """One expiry's raw SVI total variance ``w(k)`` (Gatheral 2004)."""

    a: float
    b: float
    rho: float
    m: float
    s: float

    def __post_init__(self) -> None:
        if not (self.b >= 0 and abs(self.rho) < 1 and self.s > 0):
            raise InputError(f"SVI slice {self} needs b >= 0, |rho| < 1, s > 0")
        if self.a + self.b * self.s * math.sqrt(1 - self.rho**2) < -ARBITRAGE_TOL:
            raise InputError(f"SVI slice {self} has a negative minimum total variance")

    @classmethod
    def flat(cls, total_variance: float) -> "SviSlice":
        """A slice with the same implied volatility at every strike."""
        return cls(float(total_variance), 0.0, 0.0, 0.0, 1.0)

    def w(self, k: np.ndarray) -> np.ndarray:
        x = np.asarray(k, dtype=float) - self.m
        return self.a + self.b * (self.rho * x + np.sqrt(x * x + self.s * self.s))

    def dw(self, k: np.ndarray) -> np.ndarray:
        x = np.asarray(k, dtype=float) - self.m
        return self.b * (self.rho + x / np.sqrt(x * x + self.s * self.s))

    def d2w(self, k: np.ndarray) -> np.ndarray:
        x = np.asarray(k, dtype=float) - self.m
        return self.b * self.s * self.s / (x * x + self.s * self.s) ** 1.5

    def durrleman(self, k: np.ndarray) -> np.ndarray:
        """Durrleman's ``g(k)``: negative where the slice implies a negative density."""
        k = np.asarray(k, dtype=float)
        w, w1, w2 = self.w(k), self.dw(k), self.d2w(k)
        return (1 - k * w1 / (2 * w)) ** 2 - w1**2 / 4 * (1 / w + 0.25) + w2 / 2

    @property
    def is_flat(self) -> bool:
        return self.b == 0.0


def _slice_from(x: np.ndarray) -> SviSlice:
    vmin, u, rho, m, s = (float(v) for v in x)
    b = WING_BOUND * u / (1 + abs(rho))
    return SviSlice(vmin - b * s * math.sqrt(1 - rho * rho), b, rho, m, s)


def fit_svi(k: Sequence[float], w: Sequence[float], weights: Sequence[float] | None = None) -> SviSlice:
    """Least-squares raw SVI fit of total variances ``w`` at log-moneyness ``k``.

    The parameters are searched as (minimum variance >= 0, wing slope as a fraction of
    Lee's bound, rho, m, s), so every candidate already satisfies the no-arbitrage
    constraints on the parameters; several starts guard against local minima. With fewer
    than five quotes the smile is under-determined: the fit then keeps ``rho = m = 0`` and
    fits the level and curvature only.
    """
    k = np.asarray(k, dtype=float)
    w = np.asarray(w, dtype=float)
    wt = np.ones_like(w) if weights is None else np.sqrt(np.asarray(weights, dtype=float))
    if k.size == 0 or k.shape != w.shape or np.any(~np.isfinite(w)) or np.any(w <= 0):
        raise InputError("an SVI fit needs positive, finite total variances, one per log-moneyness")
    if k.size == 1 or np.ptp(k) == 0:
        return SviSlice.flat(float(np.average(w, weights=wt**2)))
    span = max(float(np.ptp(k)), 1e-3)
    lo = [0.0, 0.0, -0.999, float(k.min()) - span, 1e-4]
    hi = [float(w.max()) * 1.5, 1.0, 0.999, float(k.max()) + span, 10 * span + 1.0]
    free = [True] * 5
    if k.size < 5:
        free = [True, True, False, False, True]

    def resid(y: np.ndarray) -> np.ndarray:
        x = _expand(y)
        return wt * (_slice_from(x).w(k) - w)

    def _expand(y: np.ndarray) -> np.ndarray:
        x = np.zeros(5)
        x[np.array(free)] = y
        return x

    best = None
    starts = [
        (float(w.min()) * 0.9, 0.1, -0.5, 0.0, 0.1 * span + 0.01),
        (float(w.min()) * 0.5, 0.3, 0.0, float(k[np.argmin(w)]), 0.3 * span + 0.01),
        (float(w.min()) * 0.2, 0.6, -0.8, 0.1 * span, span),
        (float(w.min()) * 0.95, 0.05, 0.3, -0.1 * span, 0.05 * span + 0.005),
    ]
    sel = np.array(free)
    for x0 in starts:
        x0 = np.clip(np.array(x0), np.array(lo) + 1e-12, np.array(hi) - 1e-12)
        r = least_squares(resid, x0[sel], bounds=(np.array(lo)[sel], np.array(hi)[sel]), xtol=1e-14, ftol=1e-14,
                          gtol=1e-14, max_nfev=4000)
        if best is None or r.cost < best.cost:
            best = r
    assert best is not None
    return _slice_from(_expand(best.x))


class VarianceSurface:
    """SVI slices at increasing expiries, checked free of static arbitrage.

    Parameters
    ----------
    expiries
        Increasing year fractions, one per slice.
    slices
        The fitted total variance of each expiry.
    spot, rate, dividend
        The market the log-moneyness refers to: ``F(T) = spot exp((rate - dividend) T)``.
    k_range
        The log-moneyness interval on which the arbitrage tests run (the quoted strikes and
        a margin, see :func:`surface_from_quotes`); outside it the local variance is held at
        its value on the edge.
    strikes_of
        Optional, for messages: the quoted strikes per expiry.
    """

    def __init__(
        self,
        expiries: Sequence[float],
        slices: Sequence[SviSlice],
        spot: float,
        rate: float,
        dividend: float,
        k_range: tuple[float, float] = (-1.0, 1.0),
        source: str = "",
    ) -> None:
        t = np.asarray(expiries, dtype=float)
        if t.ndim != 1 or t.size == 0 or t.size != len(slices) or t[0] <= 0 or np.any(np.diff(t) <= 0):
            raise InputError(f"a variance surface needs increasing expiries > 0, one per slice; got {t.tolist()}")
        if not (spot > 0 and math.isfinite(rate) and math.isfinite(dividend)):
            raise InputError(f"a variance surface needs spot > 0 and finite rate and dividend; got "
                             f"spot={spot}, rate={rate}, dividend={dividend}")
        lo, hi = float(k_range[0]), float(k_range[1])
        if not lo < hi:
            raise InputError(f"k_range {k_range} must be an interval")
        self.expiries = t
        self.slices = tuple(slices)
        self.spot, self.rate, self.dividend = float(spot), float(rate), float(dividend)
        self.k_range = (lo, hi)
        self.source = source
        self._check_arbitrage()

    # -- construction helpers
    @classmethod
    def flat(cls, vol: float, spot: float, rate: float, dividend: float, expiry: float = 1.0) -> "VarianceSurface":
        """The surface of one implied volatility at every strike and expiry."""
        return cls([expiry], [SviSlice.flat(vol * vol * expiry)], spot, rate, dividend, source=f"flat {vol:g}")

    @property
    def is_flat(self) -> bool:
        """Every slice flat with one implied volatility (Black-Scholes)."""
        if not all(s.is_flat for s in self.slices):
            return False
        v = [s.a / t for s, t in zip(self.slices, self.expiries)]
        return bool(np.allclose(v, v[0], rtol=1e-12, atol=0.0))

    def flattened(self) -> "VarianceSurface":
        """The flat surface at the at-the-money-forward implied volatility of the first
        expiry: the degenerate case in which local volatility is Black-Scholes."""
        return VarianceSurface.flat(self.atm_vol(), self.spot, self.rate, self.dividend, float(self.expiries[0]))

    def atm_vol(self) -> float:
        return float(math.sqrt(self.slices[0].w(np.array(0.0)) / self.expiries[0]))

    def with_market(self, spot: float, rate: float, dividend: float) -> "VarianceSurface":
        return VarianceSurface(self.expiries, self.slices, spot, rate, dividend, self.k_range, self.source)

    def forward(self, t: np.ndarray | float) -> np.ndarray:
        return self.spot * np.exp((self.rate - self.dividend) * np.asarray(t, dtype=float))

    # -- the surface
    def _bracket(self, t: float) -> tuple[int, int, float]:
        """Slices ``i, j`` around ``t`` and the weight of ``j`` (``i == j`` outside)."""
        ts = self.expiries
        if t <= ts[0]:
            return 0, 0, 0.0
        if t >= ts[-1]:
            return len(ts) - 1, len(ts) - 1, 0.0
        j = int(np.searchsorted(ts, t))
        i = j - 1
        return i, j, float((t - ts[i]) / (ts[j] - ts[i]))

    def _beyond(self, t: float) -> float:
        """Time past the last expiry (0 before it)."""
        return max(0.0, float(t) - float(self.expiries[-1]))

    def _rate_beyond(self) -> float:
        """The at-the-money total-variance rate the surface grows at past its last expiry."""
        return float(self.slices[-1].w(np.zeros(1))[0]) / float(self.expiries[-1])

    def total_variance(self, k: np.ndarray, t: float) -> np.ndarray:
        """``w(k, t)``: linear in ``t`` between expiries; before the first expiry the first
        slice scaled (flat implied vol); past the last one the last slice plus the
        at-the-money variance rate times the time beyond it (the skew is not scaled up: a
        slice scaled by a large factor has butterfly arbitrage, Durrleman's condition
        failing as the squared slope grows)."""
        i, j, x = self._bracket(t)
        if i == j:
            past = self._beyond(t)
            if past > 0.0:
                return self.slices[i].w(k) + self._rate_beyond() * past
            return self.slices[i].w(k) * (t / self.expiries[i])
        return (1 - x) * self.slices[i].w(k) + x * self.slices[j].w(k)

    def slope(self, k: np.ndarray, t: float) -> np.ndarray:
        """``dw/dk (k, t)``, the skew of total variance, interpolated like :meth:`total_variance`."""
        i, j, x = self._bracket(t)
        if i == j:
            if self._beyond(t) > 0.0:
                return self.slices[i].dw(k)
            return self.slices[i].dw(k) * (t / self.expiries[i])
        return (1 - x) * self.slices[i].dw(k) + x * self.slices[j].dw(k)

    def implied_vol(self, strike: np.ndarray | float, t: float) -> np.ndarray:
        k = np.log(np.asarray(strike, dtype=float) / float(self.forward(t)))
        return np.sqrt(self.total_variance(k, t) / t)

    def local_variance(self, k: np.ndarray, t: float) -> np.ndarray:
        """Dupire's local variance at log-moneyness ``k`` (``log(S / F(t))``) and time ``t``.

        ``k`` is held inside :attr:`k_range` (flat extrapolation of local volatility), where
        the arbitrage tests guarantee a positive numerator and denominator."""
        k = np.clip(np.asarray(k, dtype=float), *self.k_range)
        i, j, x = self._bracket(t)
        si, sj = self.slices[i], self.slices[j]
        if i == j and self._beyond(t) > 0.0:
            rate = self._rate_beyond()
            w, w1, w2 = si.w(k) + rate * self._beyond(t), si.dw(k), si.d2w(k)
            wt = np.full_like(w, rate)
        elif i == j:
            f = t / self.expiries[i]
            w, w1, w2 = si.w(k) * f, si.dw(k) * f, si.d2w(k) * f
            wt = si.w(k) / self.expiries[i]
        else:
            w = (1 - x) * si.w(k) + x * sj.w(k)
            w1 = (1 - x) * si.dw(k) + x * sj.dw(k)
            w2 = (1 - x) * si.d2w(k) + x * sj.d2w(k)
            wt = (sj.w(k) - si.w(k)) / (self.expiries[j] - self.expiries[i])
        den = 1 - k * w1 / w + 0.25 * (-0.25 - 1 / w + k * k / (w * w)) * w1 * w1 + 0.5 * w2
        return wt / den

    # -- arbitrage
    def _grid(self) -> np.ndarray:
        return np.linspace(self.k_range[0], self.k_range[1], 401)

    def _strike_text(self, k: np.ndarray, t: float) -> str:
        f = float(self.forward(t))
        return f"strikes {f * math.exp(float(k.min())):.6g} to {f * math.exp(float(k.max())):.6g}"

    def _check_arbitrage(self) -> None:
        k = self._grid()
        for t, s in zip(self.expiries, self.slices):
            if np.any(s.w(k) <= 0):
                raise SurfaceArbitrage(f"expiry {t:g}: total variance is not positive at {self._strike_text(k[s.w(k) <= 0], t)}")
            g = s.durrleman(k)
            bad = g < -ARBITRAGE_TOL
            if np.any(bad):
                raise SurfaceArbitrage(
                    f"expiry {t:g} has butterfly arbitrage (negative density, Durrleman's g down to "
                    f"{g.min():.3g}) at {self._strike_text(k[bad], t)}"
                )
        for (t0, s0), (t1, s1) in zip(zip(self.expiries, self.slices), zip(self.expiries[1:], self.slices[1:])):
            drop = s0.w(k) - s1.w(k)
            bad = drop > ARBITRAGE_TOL
            if np.any(bad):
                raise SurfaceArbitrage(
                    f"calendar arbitrage between expiries {t0:g} and {t1:g}: total variance falls by up to "
                    f"{drop.max():.3g} at {self._strike_text(k[bad], t1)} (log-moneyness {k[bad].min():.3g} "
                    f"to {k[bad].max():.3g})"
                )
        # the interpolated surface between and around the expiries
        for t in self._check_times():
            lv = self.local_variance(k, t)
            if not np.all(np.isfinite(lv)) or np.any(lv < 0):
                bad = ~np.isfinite(lv) | (lv < 0)
                raise SurfaceArbitrage(f"the interpolated surface at time {t:.4g} gives no local volatility at "
                                       f"{self._strike_text(k[bad], t)} (negative density)")

    def _check_times(self) -> Iterable[float]:
        ts = np.concatenate([[0.0], self.expiries])
        for a, b in zip(ts[:-1], ts[1:]):
            yield from (a + (b - a) * np.array([0.05, 0.5, 0.95])).tolist()
        last = float(self.expiries[-1])
        yield from (last * f for f in (1.5, 3.0, 10.0, 30.0))
        yield max(FAR_HORIZON, 100.0 * last)

    def __repr__(self) -> str:
        src = f" from {self.source}" if self.source else ""
        return f"VarianceSurface({len(self.slices)} expiries {self.expiries[0]:g}..{self.expiries[-1]:g}{src})"

    def __eq__(self, other: object) -> bool:
        return (isinstance(other, VarianceSurface) and self.slices == other.slices
                and np.array_equal(self.expiries, other.expiries)
                and (self.spot, self.rate, self.dividend, self.k_range) == (other.spot, other.rate, other.dividend,
                                                                            other.k_range))

    def __hash__(self) -> int:
        return hash((self.slices, tuple(self.expiries.tolist()), self.spot, self.rate, self.dividend, self.k_range))


def surface_from_quotes(quotes: object) -> VarianceSurface:
    """Fit one SVI slice per expiry of a :class:`~limitcase.quotes.QuoteSet` and check the
    surface for static arbitrage.

    Quotes without an implied volatility (they break a no-arbitrage bound) are refused; the
    weight column weights the fit. Log-moneyness is taken against the market's forward at
    each expiry, so rate and dividend curves are allowed: the surface's own (flat) rate and
    dividend are the market's at the last expiry, and a local-volatility model given the
    flat rate ``R(T)`` and yield ``Q(T)`` of an expiry ``T`` prices that expiry's vanillas
    exactly as the model with the curves would (local volatility is a function of
    ``S / F(t)`` and time, so the law of ``S(T) / F(T)`` does not depend on the forward's
    path, and the discount factor to ``T`` is the same).
    """
    qs = quotes
    market = qs.market  # type: ignore[attr-defined]
    t_last = max(qs.expiries())  # type: ignore[attr-defined]
    r, q = market.rate(t_last), market.dividend(t_last)
    expiries: list[float] = []
    slices: list[SviSlice] = []
    ks: list[float] = []
    for t, idx in qs.by_expiry():  # type: ignore[attr-defined]
        chosen = [qs.quotes[i] for i in idx if qs.quotes[i].weight > 0]  # type: ignore[attr-defined]
        missing = [q_ for q_ in chosen if q_.iv is None]
        if missing:
            raise InputError(f"{qs.path} line {missing[0].line}: quote {missing[0].label} has no implied "  # type: ignore[attr-defined]
                             "volatility (it breaks a no-arbitrage bound); fix or drop it before building a surface")
        if not chosen:
            continue
        f = market.forward(t)
        # one variance per strike (a call and a put at one strike: their average)
        by_k: dict[float, list[tuple[float, float]]] = {}
        for q_ in chosen:
            by_k.setdefault(q_.strike, []).append((q_.iv, q_.weight))
        k = np.array([math.log(kk / f) for kk in by_k])
        w = np.array([np.average([v for v, _ in vs], weights=[wt for _, wt in vs]) ** 2 * t for vs in by_k.values()])
        wt = np.array([sum(wt for _, wt in vs) for vs in by_k.values()])
        expiries.append(float(t))
        slices.append(fit_svi(k, w, wt))
        ks.extend(k.tolist())
    if not slices:
        raise InputError(f"{qs.path}: no quote with a positive weight to build a surface from")  # type: ignore[attr-defined]
    lo, hi = min(ks), max(ks)
    if hi - lo < 1e-6:  # one strike: the arbitrage tests and the local variance at that strike
        lo, hi = lo - 1e-6, hi + 1e-6
    # Paths leave the quoted strikes: the surface is used (SVI's wings, Lee-bounded) out to
    # three standard deviations of the longest expiry beyond them, where it is checked free of
    # arbitrage too; where the wings' extrapolation is not, the range shrinks toward the quotes
    # (halving the margin), and arbitrage inside the quoted strikes is refused.
    margin = 3.0 * math.sqrt(max(float(s.w(np.array(0.0))) for s in slices))
    for _ in range(6):
        try:
            return VarianceSurface(expiries, slices, market.spot, r, q, (lo - margin, hi + margin),
                                   source=str(qs.path))  # type: ignore[attr-defined]
        except SurfaceArbitrage:
            margin /= 2.0
    return VarianceSurface(expiries, slices, market.spot, r, q, (lo, hi), source=str(qs.path))  # type: ignore[attr-defined]
