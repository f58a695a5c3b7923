"""Lookback options: the payoff reads the maximum or the minimum of the price.

Monitoring. The extreme runs over today's spot and ``n`` equally spaced dates ending at T,
or, with ``continuous = 1``, over the whole path: between two dates the log-price is a
Brownian bridge, and its extreme over an interval with end points ``x, y`` and integrated
variance ``v`` is drawn exactly from one uniform ``U``, inverting
``P(max > b) = exp(-2 (b - x)(b - y) / v)`` (P. Glasserman, *Monte Carlo Methods in Financial
Engineering*, 2004, section 6.4, from memory; the inversion is two lines of algebra):

    max = (x + y + sqrt((x - y)^2 - 2 v ln U)) / 2,   min = (x + y - sqrt((x - y)^2 - 2 v ln U)) / 2.

``U`` is ``obs.uniforms`` (one per path and interval, shared by every product of a check),
``v`` is ``obs.step_var``, and the first interval starts at today's spot. The continuous
extreme is exact, so the continuous price does not depend on the number of dates. A
product reads either the maximum or the minimum; both from the same ``U`` would not have
their joint law (do not combine them in one payoff).

How the limits are checked. Discrete monitoring (the default) is priced from the law of the
running extreme of the log-price walk, by Lindley's recursion (Spitzer's identity; see
:func:`limitcase.references.discrete_lookbacks.discrete_lookback`). Continuous monitoring has closed forms (Goldman, Sosin and
Gatto 1979 for the floating strike; Conze and Viswanathan 1991 for the fixed strike). With
one observation at T the extreme is ``max(S0, S(T))`` or ``min(S0, S(T))``: the floating
options become the at-the-money forward-start option started today, the fixed ones the
European option (when the strike is on the right side of S0), path by path. Path by path
too: continuous monitoring and more (nested) dates only widen the extreme, the fixed call
pays at least the European call, and every lookback pays at least the geometric Asian
option of the same kind on the same dates (the extreme lies beyond the geometric mean).
"""

from __future__ import annotations

import numpy as np

from limitcase import Bound, Convex, Monotone, NoReference, Param, Product, Reduction
from limitcase.references import lookback_fixed, lookback_floating
from limitcase.references.discrete_lookbacks import discrete_lookback

from ._common import bs_inputs, even_dates, own_closed_form, period_starts
from .asians import GeometricAsianCall, GeometricAsianPut, GeometricFloatingAsianCall, GeometricFloatingAsianPut
from .forward_start import SPOT, ForwardStartCall, ForwardStartPut
from .vanilla import EuropeanCall, EuropeanPut


class _Lookback(Product):
    """Shared monitoring: today's spot and ``observations`` dates, or the whole path."""

    abstract = True
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")
    observations = Param(12, low=1, high=10_000, integer=True, doc="monitoring dates, equally spaced, ending at T")
    continuous = Param(0, low=0, high=1, integer=True, doc="1: monitor the whole path (Brownian bridge); 0: the dates")

    def dates(self) -> np.ndarray:
        return even_dates(self.maturity, self.observations)

    def highest(self, obs) -> np.ndarray:
        """The maximum of S over today and the dates (or over the whole path), per path."""
        if not self.continuous:
            return np.maximum(obs.s.max(axis=1), obs.s0)
        x, y = np.log(period_starts(obs)), np.log(obs.s)
        top = (x + y + np.sqrt((x - y) ** 2 - 2.0 * obs.step_var * np.log(obs.uniforms))) / 2.0
        return np.exp(top.max(axis=1))

    def lowest(self, obs) -> np.ndarray:
        """The minimum of S over today and the dates (or over the whole path), per path."""
        if not self.continuous:
            return np.minimum(obs.s.min(axis=1), obs.s0)
        x, y = np.log(period_starts(obs)), np.log(obs.s)
        bottom = (x + y - np.sqrt((x - y) ** 2 - 2.0 * obs.step_var * np.log(obs.uniforms))) / 2.0
        return np.exp(bottom.min(axis=1))

    def _discrete(self, model, kind: str, strike: float = 0.0) -> float:
        """Discrete monitoring: the recursion on the running extreme (Spitzer-Lindley),
        on the dates rebuilt from the terms (today and ``observations`` equal steps)."""
        spot, rate, dividend, vol = bs_inputs(model, self)
        if vol == 0.0:
            raise NoReference(f"{type(self).__name__} has no discrete reference at zero volatility")
        return discrete_lookback(spot, strike, self.maturity, self.observations, rate, dividend, vol, kind)


def _monitoring_checks() -> tuple:
    """Continuous closed form (on the default dates and on one date), and path-by-path
    monotonicity in the monitoring (discrete monitoring, the default)."""
    reductions = (
        own_closed_form(note="discrete monitoring: the law of the running extreme by Lindley's recursion (Spitzer)"),
        own_closed_form("continuous", {"continuous": 1}, note="continuous monitoring: the closed form"),
        own_closed_form(
            "continuous_one_date",
            {"continuous": 1, "observations": 1},
            note="continuous monitoring bridged from S0 to S(T) in one step: the same closed form",
        ),
    )
    relations = (
        Monotone("continuous", +1, to=1, pathwise=True, name="continuous_above_discrete",
                 note="the bridge extreme lies beyond the dates' extreme on every path"),
        Monotone("observations", +1, to=lambda p: 2 * p.observations, pathwise=True, name="more_dates_never_lower",
                 note="twice the dates include the dates: the extreme can only widen (discrete monitoring)"),
    )
    return reductions, relations


_MONITORING_REDUCTIONS, _MONITORING_RELATIONS = _monitoring_checks()


def _above_geometric(asian, text: str) -> Bound:
    """At least the geometric Asian option on the same dates, path by path: the maximum is
    at least, the minimum at most, the geometric mean of the prices on the dates."""

    def twin(p):
        kw = {"strike": p.strike} if "strike" in p.params() else {}
        return asian(maturity=p.maturity, fixings=p.observations, **kw)

    return Bound(
        "above_geometric_asian",
        ">=",
        lambda p, m: twin(p).reference(m),
        pathwise_leg=twin,
        source=f"{asian.__name__} on the same dates (closed form); {text} on every path",
    )


class FloatingLookbackCall(_Lookback):
    """Pays S(T) - m at T, m the minimum of S over today and the dates (or the whole path).

    Continuous monitoring: Goldman, Sosin and Gatto (1979).

    Limits: its own discrete reference; continuous -> the closed form (with any number of dates); one observation ->
    max(S(T) - S0, 0), the at-the-money forward-start call started today (path by path).
    Relations: at least that call and the geometric floating Asian call on the same dates
    (path by path); continuous and more dates never lower (path by path).
    """

    reductions = (
        Reduction(
            "one_observation",
            {"observations": 1, "continuous": 0},
            becomes=lambda p: ForwardStartCall(alpha=1.0, start=0.0, maturity=p.maturity),
            note="one date: S(T) - min(S0, S(T)) = max(S(T) - S0, 0), the at-the-money call",
        ),
        *_MONITORING_REDUCTIONS,
    )
    relations = (
        Bound(
            "above_atm_call",
            ">=",
            lambda p, m: ForwardStartCall(alpha=1.0, start=0.0, maturity=p.maturity).reference(m),
            pathwise_leg=lambda p: ForwardStartCall(alpha=1.0, start=0.0, maturity=p.maturity),
            source="Black-Scholes call struck at S0 (m <= min(S0, S(T)) on every path)",
        ),
        _above_geometric(GeometricFloatingAsianCall, "S(T) - m >= max(S(T) - G, 0)"),
        *_MONITORING_RELATIONS,
    )

    def payoff(self, obs):
        return obs.s[:, -1] - self.lowest(obs)

    def reference(self, model):
        if not self.continuous:
            return self._discrete(model, "floating_call")
        spot, rate, dividend, vol = bs_inputs(model, self)
        return lookback_floating(spot, self.maturity, rate, dividend, vol, "call")

    def reference_source(self) -> str:
        return "lookback_floating (Goldman-Sosin-Gatto) call" if self.continuous else "discrete_lookback (Spitzer-Lindley recursion)"


class FloatingLookbackPut(_Lookback):
    """Pays M - S(T) at T, M the maximum of S over today and the dates (or the whole path).

    Continuous monitoring: Goldman, Sosin and Gatto (1979).

    Limits: its own discrete reference; continuous -> the closed form; one observation -> max(S0 - S(T), 0), the
    at-the-money forward-start put started today (path by path).
    Relations: at least that put and the geometric floating Asian put on the same dates
    (path by path); continuous and more dates never lower (path by path).
    """

    reductions = (
        Reduction(
            "one_observation",
            {"observations": 1, "continuous": 0},
            becomes=lambda p: ForwardStartPut(alpha=1.0, start=0.0, maturity=p.maturity),
            note="one date: max(S0, S(T)) - S(T) = max(S0 - S(T), 0), the at-the-money put",
        ),
        *_MONITORING_REDUCTIONS,
    )
    relations = (
        Bound(
            "above_atm_put",
            ">=",
            lambda p, m: ForwardStartPut(alpha=1.0, start=0.0, maturity=p.maturity).reference(m),
            pathwise_leg=lambda p: ForwardStartPut(alpha=1.0, start=0.0, maturity=p.maturity),
            source="Black-Scholes put struck at S0 (M >= max(S0, S(T)) on every path)",
        ),
        _above_geometric(GeometricFloatingAsianPut, "M - S(T) >= max(G - S(T), 0)"),
        *_MONITORING_RELATIONS,
    )

    def payoff(self, obs):
        return self.highest(obs) - obs.s[:, -1]

    def reference(self, model):
        if not self.continuous:
            return self._discrete(model, "floating_put")
        spot, rate, dividend, vol = bs_inputs(model, self)
        return lookback_floating(spot, self.maturity, rate, dividend, vol, "put")

    def reference_source(self) -> str:
        return "lookback_floating (Goldman-Sosin-Gatto) put" if self.continuous else "discrete_lookback (Spitzer-Lindley recursion)"


class FixedLookbackCall(_Lookback):
    """Pays max(M - K, 0) at T, M the maximum of S over today and the dates (or the whole path).

    Continuous monitoring: Conze and Viswanathan (1991).

    Limits: its own discrete reference; continuous -> the closed form; one observation with K >= S0 -> the European
    call (max(S0, S(T)) > K only where S(T) > K; the case pins S0 and raises K to it).
    Relations: at least the European call (M >= S(T)) and the geometric Asian call on the
    same dates (M >= G), path by path; decreasing and convex in the strike (path by path);
    continuous and more dates never lower (path by path).
    """

    strike = Param(110.0, low=0.0, doc="strike (default out of the money: above S0)")

    reductions = (
        Reduction(
            "one_observation",
            {"observations": 1, "continuous": 0, "strike": lambda p: max(p.strike, SPOT)},
            model_changes={"spot": SPOT},
            becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity),
            note=f"one date, K >= S0 = {SPOT:g}: max(max(S0, S(T)) - K, 0) = max(S(T) - K, 0)",
        ),
        *_MONITORING_REDUCTIONS,
    )
    relations = (
        Bound(
            "above_european",
            ">=",
            lambda p, m: EuropeanCall(strike=p.strike, maturity=p.maturity).reference(m),
            pathwise_leg=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity),
            source="Black-Scholes call (M >= S(T) on every path)",
        ),
        _above_geometric(GeometricAsianCall, "M >= G"),
        Monotone("strike", -1, to=lambda p: p.strike + 10.0, pathwise=True),
        Convex("strike", step=10.0, pathwise=True),
        *_MONITORING_RELATIONS,
    )

    def payoff(self, obs):
        return np.maximum(self.highest(obs) - self.strike, 0.0)

    def reference(self, model):
        if not self.continuous:
            return self._discrete(model, "fixed_call", self.strike)
        spot, rate, dividend, vol = bs_inputs(model, self)
        return lookback_fixed(spot, self.strike, self.maturity, rate, dividend, vol, "call")

    def reference_source(self) -> str:
        return "lookback_fixed (Conze-Viswanathan) call" if self.continuous else "discrete_lookback (Spitzer-Lindley recursion)"


class FixedLookbackPut(_Lookback):
    """Pays max(K - m, 0) at T, m the minimum of S over today and the dates (or the whole path).

    Continuous monitoring: Conze and Viswanathan (1991).

    Limits: its own discrete reference; continuous -> the closed form; one observation with K <= S0 -> the European
    put (the case pins S0 and lowers K to it).
    Relations: at least the European put (m <= S(T)) and the geometric Asian put on the
    same dates (m <= G), path by path; increasing and convex in the strike (path by path);
    continuous and more dates never lower (path by path).
    """

    strike = Param(90.0, low=0.0, doc="strike (default out of the money: below S0)")

    reductions = (
        Reduction(
            "one_observation",
            {"observations": 1, "continuous": 0, "strike": lambda p: min(p.strike, SPOT)},
            model_changes={"spot": SPOT},
            becomes=lambda p: EuropeanPut(strike=p.strike, maturity=p.maturity),
            note=f"one date, K <= S0 = {SPOT:g}: max(K - min(S0, S(T)), 0) = max(K - S(T), 0)",
        ),
        *_MONITORING_REDUCTIONS,
    )
    relations = (
        Bound(
            "above_european",
            ">=",
            lambda p, m: EuropeanPut(strike=p.strike, maturity=p.maturity).reference(m),
            pathwise_leg=lambda p: EuropeanPut(strike=p.strike, maturity=p.maturity),
            source="Black-Scholes put (m <= S(T) on every path)",
        ),
        _above_geometric(GeometricAsianPut, "m <= G"),
        Monotone("strike", +1, to=lambda p: p.strike + 10.0, pathwise=True),
        Convex("strike", step=10.0, pathwise=True),
        *_MONITORING_RELATIONS,
    )

    def payoff(self, obs):
        return np.maximum(self.strike - self.lowest(obs), 0.0)

    def reference(self, model):
        if not self.continuous:
            return self._discrete(model, "fixed_put", self.strike)
        spot, rate, dividend, vol = bs_inputs(model, self)
        return lookback_fixed(spot, self.strike, self.maturity, rate, dividend, vol, "put")

    def reference_source(self) -> str:
        return "lookback_fixed (Conze-Viswanathan) put" if self.continuous else "discrete_lookback (Spitzer-Lindley recursion)"
