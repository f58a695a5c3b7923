"""Local volatility (Dupire 1994) on an arbitrage-free SVI surface, simulated by log-Euler.

dS/S = (r - q) dt + sigma_loc(t, S) dW, with sigma_loc from
:meth:`limitcase.volsurface.VarianceSurface.local_variance`.

Each interval of the engine's date grid is cut into ``substeps`` equal steps; on a step of
length ``h`` from time ``t`` the scheme is

    log S' = log S + (r - q - sigma^2/2) h + sigma sqrt(h) Z,   sigma = sigma_loc(t + h/2, S),

the local volatility frozen at the step's start price and mid time (mid time: at ``t = 0``
Dupire's formula is singular away from the money). Given the step's start, ``S'`` is
log-normal with mean ``S exp((r - q) h)``, so the discounted price is a martingale for any
step (the martingale audit must see no drift). The scheme's error is in the law of the
path, of weak order 1 in ``h`` (Kloeden and Platen 1992, Theorem 14.5.2, for the Euler
scheme of smooth coefficients): ``exact = False`` and ``weak_order = 1`` tell the time-step
audit to step through ``substeps``. On a flat surface the local volatility is constant and
the log-Euler step is the exact Black-Scholes transition: that is the model's degeneration.

``substeps`` normals per grid interval; ``z[:, j, k]`` drives substep ``k`` of interval ``j``.

Discrete dividends (keyword ``dividends``: a :class:`DividendSchedule` of cash amounts
``alpha_i`` and proportions ``beta_i`` paid at ex-dates ``t_i``) follow the affine
dividend model of Buehler (2007), "Volatility and dividends" (also Overhaus et al.,
"Equity hybrid derivatives", Wiley 2007, chapter 2):

    S(t) = (F(t) - D(t)) X(t) + D(t),

where ``X`` is the local-volatility process above started at 1 with no drift after
discounting at ``r - q`` (the surface is that of ``X``, the "pure" process), ``F`` the
forward (it drops by ``beta_i F + alpha_i`` at ``t_i``) and ``D(t)`` the value at ``t`` of the
cash dividends still to come, by the backward recursion ``D = 0`` after the last ex-date,
``D(t_i-) = (D(t_i) + alpha_i) / (1 - beta_i)`` and growth at ``r - q`` in between. At an
ex-date the simulated price drops by exactly ``beta_i S(t_i-) + alpha_i``, never below the
dividends still to come, and ``E[S(t)] = F(t)``. With no dividends ``S = F X`` is the plain
local-volatility model; with proportional dividends only, ``D = 0`` and the forward carries
them (a Black-Scholes surface then gives the Black-Scholes price at the dividend-adjusted
forward: an exact closed form). ``S(0) > D(0)`` is required: the dividends cannot be worth
more than the stock.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np
from scipy.special import ndtr

from ..errors import ParamError
from ..params import Param
from ..volsurface import SviSlice, VarianceSurface
from .base import Degeneration, Model, Simulated
from .gbm import BlackScholes

__all__ = ["LocalVol", "DividendSchedule", "example_surface"]


def example_surface(spot: float = 100.0, rate: float = 0.03, dividend: float = 0.01) -> VarianceSurface:
    """An invented equity-like put skew (three SVI slices: 3 months, 6 months, 1 year), free
    of static arbitrage: the surface the shipped audits and the catalogue's local-volatility
    products run on. Demo data, not a market."""
    return VarianceSurface(
        (0.25, 0.5, 1.0),
        (SviSlice(0.010, 0.06, -0.6, 0.02, 0.15), SviSlice(0.022, 0.09, -0.55, 0.03, 0.20),
         SviSlice(0.045, 0.12, -0.5, 0.04, 0.30)),
        spot, rate, dividend, (-0.6, 0.4), source="an invented equity skew",
    )


@dataclass(frozen=True, slots=True)
class DividendSchedule:
    """Discrete dividends: at ex-date ``times[i]`` the stock pays ``cash[i]`` plus
    ``proportional[i]`` times its price just before."""

    times: tuple[float, ...] = ()
    cash: tuple[float, ...] = ()
    proportional: tuple[float, ...] = ()

    def __post_init__(self) -> None:
        n = len(self.times)
        cash = tuple(float(c) for c in self.cash) or (0.0,) * n
        prop = tuple(float(b) for b in self.proportional) or (0.0,) * n
        object.__setattr__(self, "times", tuple(float(t) for t in self.times))
        object.__setattr__(self, "cash", cash)
        object.__setattr__(self, "proportional", prop)
        if len(cash) != n or len(prop) != n:
            raise ParamError(f"DividendSchedule: {n} ex-dates but {len(cash)} cash amounts and "
                             f"{len(prop)} proportions; give one of each per ex-date (0 where none)")
        t = np.asarray(self.times)
        if n and (t[0] <= 0 or np.any(np.diff(t) <= 0) or not np.all(np.isfinite(t))):
            raise ParamError(f"DividendSchedule: ex-dates {list(self.times)} must be increasing and > 0")
        if any(c < 0 or not math.isfinite(c) for c in cash):
            raise ParamError(f"DividendSchedule: cash amounts {list(cash)} must be finite and >= 0")
        if any(not 0.0 <= b < 1.0 for b in prop):
            raise ParamError(f"DividendSchedule: proportions {list(prop)} must lie in [0, 1)")

    def __bool__(self) -> bool:
        return bool(self.times)

    def pending(self, t: np.ndarray, growth: float) -> np.ndarray:
        """``D(t)``: the value at ``t`` of the cash dividends paid after ``t`` (Buehler's
        backward recursion), for each ``t``; on an ex-date that dividend counts as paid."""
        t = np.asarray(t, dtype=float)
        n = len(self.times)
        before = np.zeros(n)  # D just before each ex-date
        for i in range(n - 1, -1, -1):
            carried = before[i + 1] * math.exp(-growth * (self.times[i + 1] - self.times[i])) if i + 1 < n else 0.0
            before[i] = (carried + self.cash[i]) / (1.0 - self.proportional[i])
        nxt = np.searchsorted(np.asarray(self.times), t, side="right")  # first ex-date after t
        out = np.zeros_like(t)
        has = nxt < n
        idx = nxt[has]
        out[has] = before[idx] * np.exp(-growth * (np.asarray(self.times)[idx] - t[has]))
        return out

    def forward(self, spot: float, t: np.ndarray, growth: float) -> np.ndarray:
        """``F(t)``: the forward with the dividends paid up to and at ``t``."""
        t = np.asarray(t, dtype=float)
        out = spot * np.exp(growth * t)
        for ti, a, b in zip(self.times, self.cash, self.proportional):
            paid = t >= ti
            out = np.where(paid, out * (1 - b) - a * np.exp(growth * (t - ti)), out)
        return out


def _flat_black_scholes(m: "LocalVol") -> BlackScholes:
    return BlackScholes(spot=m.spot, rate=m.rate, dividend=m.dividend, vol=m.surface.atm_vol())


class LocalVol(Model):
    """One asset under Dupire local volatility built from a :class:`VarianceSurface`.

    Parameters
    ----------
    surface
        The implied total-variance surface (keyword; default: a flat 20% surface at the
        model's spot, rate and dividend). Its market (spot, rate, dividend) is replaced
        by the model's, so the log-moneyness always refers to the simulated forward.
    dividends
        Discrete dividends (keyword; :class:`DividendSchedule`; default none), on top of
        the continuous ``dividend`` yield.
    spot, rate, dividend
        Price today, short rate, continuous dividend yield (flat).
    substeps
        Log-Euler steps per interval of the date grid.
    """

    spot = Param(100.0, low=0.0, low_open=True, doc="price today")
    rate = Param(0.05, low=-1.0, high=1.0, doc="continuously compounded short rate")
    dividend = Param(0.02, low=-1.0, high=1.0, doc="continuous dividend yield")
    substeps = Param(8, low=1, high=4096, integer=True, doc="log-Euler steps per interval of the date grid")

    exact: ClassVar[bool] = False
    weak_order: ClassVar[float] = 1.0
    degenerations = (
        Degeneration(
            "flat_surface",
            {"surface": lambda m: m.surface.flattened()},
            becomes=_flat_black_scholes,
            note="a flat implied-volatility surface has a constant local volatility: Black-Scholes at that "
                 "volatility, whose transition the log-Euler step reproduces exactly",
        ),
    )

    def __init__(self, surface: VarianceSurface | None = None, dividends: DividendSchedule | None = None,
                 **values: Any) -> None:
        super().__init__(**values)
        dividends = DividendSchedule() if dividends is None else dividends
        if not isinstance(dividends, DividendSchedule):
            raise ParamError(f"LocalVol: dividends={dividends!r} is not a DividendSchedule")
        if dividends and float(dividends.pending(np.array([0.0]), self.rate - self.dividend)[0]) >= self.spot:
            raise ParamError(f"LocalVol: the cash dividends are worth at least the spot {self.spot:g} today; "
                             "lower the amounts or raise the spot")
        object.__setattr__(self, "dividends", dividends)
        if surface is None:
            surface = VarianceSurface.flat(0.2, self.spot, self.rate, self.dividend)
        if not isinstance(surface, VarianceSurface):
            raise ParamError(f"LocalVol: surface={surface!r} is not a VarianceSurface "
                             "(build one with limitcase.volsurface.surface_from_quotes)")
        if (surface.spot, surface.rate, surface.dividend) != (self.spot, self.rate, self.dividend):
            surface = surface.with_market(self.spot, self.rate, self.dividend)
        object.__setattr__(self, "surface", surface)

    # a surface is not a bounded number: carried beside the Params, like MultiBlackScholes' arrays
    def params(self) -> dict[str, Any]:
        out = super().params()
        out["surface"] = self.surface
        out["dividends"] = self.dividends
        return out

    def replace(self, **changes: Any) -> "LocalVol":
        values = super().params()
        surface = changes.pop("surface", self.surface)
        dividends = changes.pop("dividends", self.dividends)
        values.update(changes)
        return type(self)(surface=surface, dividends=dividends, **values)

    def __eq__(self, other: object) -> bool:
        return type(self) is type(other) and self.params() == other.params()  # type: ignore[union-attr]

    def __hash__(self) -> int:
        return hash((type(self).__name__, tuple(sorted((k, v) for k, v in super().params().items())), self.surface,
                     self.dividends))

    def __repr__(self) -> str:
        p = super().params()
        inner = ", ".join(f"{k}={v!r}" for k, v in p.items())
        divs = f", dividends={self.dividends!r}" if self.dividends else ""
        return f"{type(self).__name__}({inner}, surface={self.surface!r}{divs})"

    def normals_per_step(self) -> int:
        return int(self.substeps)

    def initial(self) -> np.ndarray:
        return np.array([self.spot])

    def dividend_yields(self) -> np.ndarray:
        return np.array([self.dividend])

    def _simulate(self, times: np.ndarray, z: np.ndarray, rng: np.random.Generator) -> Simulated:
        m = int(self.substeps)
        n_paths = z.shape[0]
        dt = np.diff(times, prepend=0.0)
        g = self.rate - self.dividend
        x = np.zeros(n_paths)  # log X, the pure process: a martingale started at 1
        out = np.empty((n_paths, times.size, 1))
        var = np.empty((n_paths, times.size, 1))
        divs = self.dividends
        fwd = divs.forward(self.spot, times, g) if divs else self.spot * np.exp(g * times)
        pend = divs.pending(times, g) if divs else np.zeros(times.size)
        t = 0.0
        for j in range(times.size):
            h = dt[j] / m
            acc = np.zeros(n_paths)
            for k in range(m):
                lv = self.surface.local_variance(x, t + 0.5 * h)
                x += -0.5 * lv * h + np.sqrt(lv * h) * z[:, j, k]
                acc += lv * h
                t += h
            t = float(times[j])  # no drift of the clock from summing substeps
            if divs:
                out[:, j, 0] = (fwd[j] - pend[j]) * np.exp(x) + pend[j]
            else:
                out[:, j, 0] = np.exp(x + math.log(fwd[j]))
            var[:, j, 0] = acc
        return Simulated(s=out, step_var=var)

    EUROPEAN_KINDS: ClassVar[tuple[str, ...]] = ("call", "put", "cash_call", "cash_put", "asset_call", "asset_put")

    def european_price(self, kind: str, strike: float, maturity: float) -> float:
        """Today's price of a European payoff of ``S(T)`` read off the implied surface, from
        the model's parameters alone (not its simulation): Dupire's construction makes the
        model's European prices the surface's, in the limit of small steps.

        With ``S(T) = A X(T) + D`` (``A = F(T) - D(T)``, ``D = D(T)``; no dividends: ``A = F``,
        ``D = 0``) and ``X`` log-normal-like with total variance ``w(k)`` at ``k = log kappa``,
        ``kappa = (K - D) / A``: the call is ``A c(kappa)``, ``c = N(d1) - kappa N(d2)`` (Black 1976
        on a forward of 1), the cash digital ``N(d2) - n(d2) w'(k) / (2 sqrt w)`` (the call's
        strike derivative with the skew term), the asset digital ``A (c + kappa N_dig) + D N_dig``;
        puts by parity (``E[X] = 1``). Discounted at the flat rate. ``kind`` is one of
        :attr:`EUROPEAN_KINDS` (cash digitals pay 1)."""
        if kind not in self.EUROPEAN_KINDS:
            raise ParamError(f"LocalVol.european_price: kind={kind!r} is not one of {self.EUROPEAN_KINDS}")
        t = float(maturity)
        if not t > 0:
            raise ParamError(f"LocalVol.european_price: maturity={maturity!r} must be > 0")
        g = self.rate - self.dividend
        fwd = float(self.forward([t])[0, 0])
        d = float(self.dividends.pending(np.array([t]), g)[0]) if self.dividends else 0.0
        a = fwd - d
        disc = math.exp(-self.rate * t)
        kappa = (float(strike) - d) / a
        if kappa <= 0.0:  # the strike is below every reachable price
            call, dig = 1.0 - kappa, 1.0
        else:
            k = math.log(kappa)
            w = float(self.surface.total_variance(np.array(k), t))
            sw = math.sqrt(w)
            d1 = -k / sw + 0.5 * sw
            d2 = d1 - sw
            call = float(ndtr(d1) - kappa * ndtr(d2))
            skew = float(self.surface.slope(np.array(k), t))
            dig = float(ndtr(d2) - math.exp(-0.5 * d2 * d2) / math.sqrt(2 * math.pi) * skew / (2 * sw))
        asset = call + kappa * dig  # E[X 1{X > kappa}]
        values = {
            "call": a * call,
            "put": a * (call - (1.0 - kappa)),
            "cash_call": dig,
            "cash_put": 1.0 - dig,
            "asset_call": a * asset + d * dig,
            "asset_put": a * (1.0 - asset) + d * (1.0 - dig),
        }
        return disc * values[kind]

    def forward(self, t: Any) -> np.ndarray:
        """Forward prices, the discrete dividends included, shape ``(len(t), 1)``."""
        t = np.asarray(t, dtype=float).reshape(-1)
        if not self.dividends:
            return super().forward(t)
        return self.dividends.forward(self.spot, t, self.rate - self.dividend).reshape(-1, 1)
