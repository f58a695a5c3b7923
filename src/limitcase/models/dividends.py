"""Black-Scholes with discrete dividends: cash amounts and proportions paid at dates.

Between ex-dates the price is geometric Brownian motion with the short rate, a continuous
yield and a volatility, simulated exactly. At an ex-date ``tau`` the price drops by the
dividend:

* a cash dividend ``D``: ``S(tau) = max(S(tau-) - D, 0)``. The floor at 0 is the usual
  treatment (a company cannot pay more than it is worth; a price that reaches 0 stays
  there); it binds only when ``S(tau-) < D``, with the probability of a put struck at the
  dividend, negligible for dividends of a few per cent of the spot (below 1e-20 for the
  defaults). :meth:`DividendBlackScholes.forward` ignores it (see there);
* a proportional dividend ``delta``: ``S(tau) = (1 - delta) S(tau-)``.

This is the "piecewise lognormal" model of the discrete dividend problem (the price
itself, not a part of it, is lognormal between ex-dates), as in Haug, Haug and Lewis,
"Back to basics: a new approach to the discrete dividend problem", Wilmott Magazine,
September 2003, 37-47; the trusted European and American prices under it come from the
lattice with discrete dividends (:func:`limitcase.references.lattice_price_dividends`).

A date of a product that falls on an ex-date sees the ex-dividend price. The engine hands
the model one standard normal per step for the diffusion and one more for every
dividend (so the transition across an ex-date inside a step is exact whatever the product's
dates): ``normals_per_step() = 1 + number of dividends``.

Degenerations: no dividends gives back :class:`~limitcase.models.BlackScholes`; with
proportional dividends only, the price at any date after the ex-dates is
``prod(1 - delta_i)`` times a Black-Scholes price path, so a European option is priced by
Black-Scholes from the spot ``S0 prod(1 - delta_i)`` (the dividends paid in the option's
life; the audit's option expires in one year).
"""

from __future__ import annotations

import math
from typing import Any, ClassVar, Sequence

import numpy as np

from ..errors import ParamError
from ..params import Param
from .base import Degeneration, Model, Simulated
from .gbm import BlackScholes

__all__ = ["AUDIT_HORIZON", "DividendBlackScholes", "proportional_factor"]

AUDIT_HORIZON = 1.0
"""Maturity in years of the option the degeneration audit prices (``limitcase.audits.constants.OPTION_MATURITY``,
checked equal by the tests): the proportional dividends paid within it scale the spot."""


def _schedule(name: str, raw: Any, *, amount_low: float, amount_high: float, what: str) -> tuple[tuple[float, float], ...]:
    """Validate ``((time, amount), ...)``: times > 0 finite and distinct, amounts in range."""
    try:
        rows = [tuple(float(x) for x in row) for row in (raw or ())]
    except (TypeError, ValueError) as exc:
        raise ParamError(
            f"{name}={raw!r} is not a sequence of (time, {what}) pairs for DividendBlackScholes; "
            f"pass e.g. ((0.5, 2.0),)"
        ) from exc
    for i, row in enumerate(rows):
        if len(row) != 2:
            raise ParamError(
                f"{name}[{i}]={row!r} is not a (time, {what}) pair for DividendBlackScholes"
            )
        t, a = row
        if not (math.isfinite(t) and t > 0.0):
            raise ParamError(
                f"{name}[{i}] time={t!r} is outside (0, inf) for DividendBlackScholes: an ex-date "
                f"is in years from today, after today"
            )
        if not (math.isfinite(a) and amount_low <= a <= amount_high):
            raise ParamError(
                f"{name}[{i}] {what}={a!r} is outside [{amount_low:g}, {amount_high:g}] for "
                f"DividendBlackScholes"
            )
    times = [r[0] for r in rows]
    if len(set(times)) != len(times):
        raise ParamError(f"{name} has two dividends on one date ({sorted(times)!r}); give each date once")
    return tuple(sorted(rows))


def proportional_factor(proportional: Sequence[tuple[float, float]], maturity: float) -> float:
    """``prod(1 - delta_i)`` over the proportional dividends with ex-date <= ``maturity``."""
    f = 1.0
    for t, d in proportional:
        if t <= maturity:
            f *= 1.0 - d
    return f


def _no_dividends(m: "DividendBlackScholes") -> BlackScholes:
    return BlackScholes(spot=m.spot, rate=m.rate, dividend=m.dividend, vol=m.vol)


def _proportional_only(m: "DividendBlackScholes") -> BlackScholes:
    f = proportional_factor(m.proportional, AUDIT_HORIZON)
    return BlackScholes(spot=m.spot * f, rate=m.rate, dividend=m.dividend, vol=m.vol)


class DividendBlackScholes(Model):
    """One asset under Black-Scholes that pays discrete dividends (see the module notes).

    Parameters
    ----------
    spot, rate, dividend, vol
        Price today, short rate, continuous dividend yield (besides the discrete
        dividends; 0 by default), volatility.
    cash
        ``((time, amount), ...)``: cash dividends, amounts >= 0 in the price's currency.
    proportional
        ``((time, fraction), ...)``: proportional dividends, fractions in [0, 1).
    """

    spot = Param(100.0, low=0.0, low_open=True, doc="price today")
    rate = Param(0.05, low=-1.0, high=1.0, doc="continuously compounded short rate")
    dividend = Param(0.0, low=-1.0, high=1.0, doc="continuous dividend yield besides the discrete dividends")
    vol = Param(0.2, low=0.0, high=5.0, doc="volatility, annualised")

    exact: ClassVar[bool] = True
    degenerations = (
        Degeneration(
            "no_dividends",
            {"cash": (), "proportional": ()},
            becomes=_no_dividends,
            note="no discrete dividends: Black-Scholes with the same rate, yield and volatility",
        ),
        Degeneration(
            "proportional_only",
            {"cash": ()},
            becomes=_proportional_only,
            note="proportional dividends only: Black-Scholes from the spot times prod(1 - fraction) "
            "over the ex-dates within the option's life",
        ),
    )

    def __init__(
        self,
        cash: Sequence[tuple[float, float]] = ((0.5, 2.0),),
        proportional: Sequence[tuple[float, float]] = (),
        **scalars: Any,
    ) -> None:
        super().__init__(**scalars)
        c = _schedule("cash", cash, amount_low=0.0, amount_high=math.inf, what="amount")
        p = _schedule("proportional", proportional, amount_low=0.0, amount_high=1.0 - 1e-12, what="fraction")
        both = [t for t, _ in c] + [t for t, _ in p]
        if len(set(both)) != len(both):
            raise ParamError(
                "cash and proportional dividends share an ex-date for DividendBlackScholes; "
                "give one dividend per date"
            )
        object.__setattr__(self, "cash", c)
        object.__setattr__(self, "proportional", p)
        events = sorted([(t, "cash", a) for t, a in c] + [(t, "proportional", a) for t, a in p])
        object.__setattr__(self, "_events", tuple(events))

    # --- identity ------------------------------------------------------------------------
    def params(self) -> dict[str, Any]:
        out = super().params()
        out["cash"] = self.cash
        out["proportional"] = self.proportional
        return out

    def replace(self, **changes: Any) -> "DividendBlackScholes":
        values = self.params()
        values.update(changes)
        return DividendBlackScholes(**values)

    def __eq__(self, other: object) -> bool:
        return isinstance(other, DividendBlackScholes) and self.params() == other.params()

    def __hash__(self) -> int:
        return hash(tuple(sorted((k, repr(v)) for k, v in self.params().items())))

    def __repr__(self) -> str:
        p = self.params()
        return (
            f"DividendBlackScholes(spot={p['spot']:g}, rate={p['rate']:g}, dividend={p['dividend']:g}, "
            f"vol={p['vol']:g}, cash={list(self.cash)}, proportional={list(self.proportional)})"
        )

    # --- model hooks ---------------------------------------------------------------------
    def normals_per_step(self) -> int:
        return 1 + len(self._events)

    def initial(self) -> np.ndarray:
        return np.array([self.spot])

    def dividend_yields(self) -> np.ndarray:
        return np.array([self.dividend])

    def forward(self, t: Any) -> np.ndarray:
        """``E[S(t)]`` with the dividends as a linear map: grow at ``r - q`` between
        ex-dates, subtract ``D`` at a cash ex-date, multiply by ``1 - delta`` at a
        proportional one. The floor at 0 is ignored: it adds the value of a put struck at
        the dividend, compounded (below 1e-20 of the spot for the defaults)."""
        t = np.asarray(t, dtype=float).reshape(-1)
        g = self.rate - self.dividend
        out = np.empty((t.size, 1))
        for i, ti in enumerate(t):
            f, last = self.spot, 0.0
            for tau, kind, a in self._events:
                if tau > ti:
                    break
                f *= math.exp(g * (tau - last))
                f = f - a if kind == "cash" else f * (1.0 - a)
                last = tau
            out[i, 0] = f * math.exp(g * (ti - last))
        return out

    def _simulate(self, times: np.ndarray, z: np.ndarray, rng: np.random.Generator) -> Simulated:
        n = z.shape[0]
        mu = self.rate - self.dividend - 0.5 * self.vol**2
        s = np.full(n, float(self.spot))
        out = np.empty((n, times.size, 1))
        prev = 0.0
        k = 0  # next event
        for j, tj in enumerate(times):
            col = 0
            while k < len(self._events) and self._events[k][0] <= tj:
                tau, kind, a = self._events[k]
                dt = tau - prev
                if dt > 0.0:
                    s *= np.exp(mu * dt + self.vol * math.sqrt(dt) * z[:, j, col])
                col += 1
                if kind == "cash":
                    s = np.maximum(s - a, 0.0)
                else:
                    s = s * (1.0 - a)
                prev = tau
                k += 1
            dt = tj - prev
            if dt > 0.0:
                s = s * np.exp(mu * dt + self.vol * math.sqrt(dt) * z[:, j, col])
            prev = tj
            out[:, j, 0] = s
        dts = np.diff(times, prepend=0.0)
        return Simulated(s=out, step_var=(self.vol**2 * dts)[None, :, None])
