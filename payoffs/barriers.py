"""Single-barrier options: up or down, knock-out or knock-in, call or put, with a cash rebate,
monitored on discrete dates or continuously.

Payoff. With vanilla = max(S(T) - K, 0) (call) or max(K - S(T), 0) (put), a *knock-out*
pays the vanilla at T if the barrier H was never touched, and the rebate R otherwise: when
it is touched (``rebate_at_hit = 1``) or at T (``rebate_at_hit = 0``). A *knock-in* pays the
vanilla at T if H was touched, and R at T otherwise. An up barrier is touched when
S >= H, a down barrier when S <= H; a barrier already touched today knocks at once.

Monitoring. A discrete barrier (``UpAndOutCall``, ...) is tested today and on n equally
spaced monitoring dates T/n, ..., T. A continuous barrier (``UpAndOutCallContinuous``, ...)
is tested at every instant. Its simulation is exact for geometric Brownian motion: between
two simulated log-prices x and y on the live side of log H, the Brownian bridge does not
touch H with probability ``1 - exp(-2 (log H - x)(log H - y) / v)``, v the integrated
variance over the interval (``obs.step_var``). Each path is weighted by its probability of
not touching H (the conditional expectation given the simulated dates, rather than a coin
drawn per interval), which is smoother and keeps in + out = vanilla exact on every path.
A rebate paid at the touch is paid at the end of the interval in which H is touched, a bias
at most ``R (1 - exp(-r dt))`` that the checks declare as an allowance.

Checks. Limits: a barrier pushed out of reach (up to inf, down to 0) gives the vanilla
(knock-out) or the rebate at T (knock-in); a barrier at the spot knocks at once. Continuous
barriers meet the Reiner-Rubinstein closed forms (M. Rubinstein and E. Reiner, "Breaking
Down the Barriers", Risk 4(8), 1991, via :func:`limitcase.references.barrier_option`),
with and without rebate, on one simulation interval and on a cell of Haug's standard
barrier table. Discrete barriers have no closed form (the Broadie-Glasserman-Kou
correction is an approximation, never a reference). Relations, path by path: in + out =
vanilla (and with rebates, in + out = vanilla + R at T); knock-out <= vanilla; a knock-out is
worth more, a knock-in less, as the barrier moves away; a discrete knock-out is worth at
least the continuous one on the same dates (a knock-in at most).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import ClassVar

import numpy as np
import sympy as sp

from limitcase.symbolic import formula_symbols
from limitcase import BlackScholes, Bound, Cashflows, Identity, Monotone, Param, Product, Reduction, Tie, running
from limitcase.errors import NoReference
from limitcase.reduce import Check, Relation
from limitcase.references import barrier_option, black_scholes
from limitcase.references.discrete_barriers import discrete_barrier_by_quadrature
from limitcase.references.schedules import equal_steps

from ._common import bs_inputs, even_dates, own_closed_form
from .vanilla import EuropeanCall, EuropeanPut, ZeroCouponBond

SPOT = 100.0
"""The spot of the scenarios; a barrier placed here is touched today."""

REBATE = 3.0
"""The rebate of the checks that pay one (the rebate of Haug's barrier table)."""

FAR_STRIKE = 1e4
"""A call strike no simulated price reaches (100 times the spot), so that a knock-out call
pays its rebate alone; the closed form is evaluated at the same strike, nothing is neglected."""

HAUG_SCENARIO = BlackScholes(spot=SPOT, rate=0.08, dividend=0.04, vol=0.25)
"""S = 100, r = 0.08, b = r - q = 0.04, sigma = 0.25: the setting of the standard barrier
table in E. G. Haug, The Complete Guide to Option Pricing Formulas, 2nd ed., 2007, ch. 4."""


def _TOUCHED(p) -> str:
    """The tie convention of a barrier: a fixing exactly on it has touched it (above an up
    barrier, below a down one)."""
    return "above" if p.up else "below"


def _kind(p: "_Barrier") -> str:
    return f"{'up' if p.up else 'down'}-and-{'out' if p.out else 'in'}-{'call' if p.call else 'put'}"


def _vanilla(p: "_Barrier") -> Product:
    return (EuropeanCall if p.call else EuropeanPut)(strike=p.strike, maturity=p.maturity)


def _rebate_at_expiry(p: "_Barrier") -> ZeroCouponBond:
    return ZeroCouponBond(cash=p.rebate, maturity=p.maturity)


def _out_of_reach(p: "_Barrier") -> float:
    return math.inf if p.up else 0.0


def _live_side(p: "_Barrier") -> float:
    """A strike 10 from the spot on the side the barrier does not knock, so that a check at
    a barrier on the spot also tells the strike and the spot apart."""
    return SPOT - 10.0 if p.up else SPOT + 10.0


def _near_spot(p: "_Barrier") -> float:
    """A barrier 1 from the spot: most paths touch it, many on the first dates."""
    return SPOT + 1.0 if p.up else SPOT - 1.0


def _further(p: "_Barrier") -> float:
    return p.barrier + 10.0 if p.up else p.barrier - 10.0


def _no_vanilla(p: "_Barrier") -> float:
    return FAR_STRIKE if p.call else 0.0


def _sibling(p: "_Barrier", *, out: bool | None = None, continuous: bool | None = None, **changes) -> "_Barrier":
    """The barrier option of another kind (in for out, continuous for discrete) on the same
    terms, with ``changes``; the number of dates carries over."""
    out = p.out if out is None else out
    continuous = p.continuous if continuous is None else continuous
    cls = FAMILY[(p.up, out, p.call, continuous)]
    values = {"strike": p.strike, "barrier": p.barrier, "rebate": p.rebate, "maturity": p.maturity}
    values["steps" if continuous else "monitoring"] = p.steps if p.continuous else p.monitoring
    if out and p.out:
        values["rebate_at_hit"] = p.rebate_at_hit
    values.update(changes)
    return cls(**values)


def _near_with_rebate_at_expiry(p: "_Barrier") -> "_Barrier":
    return p.replace(barrier=_near_spot(p), rebate=REBATE, **({"rebate_at_hit": 0} if p.out else {}))


def _hit_timing(p: "_Barrier", model) -> float:
    """Bound on the bias of paying a knock-out's rebate at the end of the simulation
    interval (length dt) in which the barrier is touched instead of at the touch:
    R exp(-r tau) - R exp(-r t_j) lies in [0, R (1 - exp(-r dt))] for r >= 0 (the touch
    probability, at most 1, is left out); for r < 0, |.| <= R exp(-rT) (exp(-r dt) - 1)."""
    if not (p.continuous and p.out and p.rebate_at_hit):
        return 0.0
    r, dt = model.short_rate, p.maturity / p.steps
    return p.rebate * max(1.0, math.exp(-r * p.maturity)) * abs(math.expm1(-r * dt))


HIT_TIMING_REASON = "rebate paid at the end of the simulation interval in which the barrier is touched"


@dataclass(frozen=True)
class MovingAway(Relation):
    """A knock-out is worth more, a knock-in less, as the barrier moves away from the
    spot (10 up for an up barrier, 10 down for a down one), on every path, without a rebate
    (a rebate larger than the vanilla would make a touch worth more)."""

    def checks(self, product: Product, model) -> list[Check]:
        worth_more = product.out
        direction = +1 if product.up == worth_more else -1
        name = f"worth_{'more' if worth_more else 'less'}_as_barrier_moves_away"
        monotone = Monotone("barrier", direction, to=_further, pathwise=True, name=name)
        return monotone.checks(product.replace(rebate=0.0), model)


# --- declarations shared by every barrier option ----------------------------------------

_AWAY_OUT = Reduction(
    "barrier_out_of_reach",
    {"barrier": _out_of_reach, "strike": 90.0, "rebate": REBATE},
    becomes=_vanilla,
    note="H at inf (up) or 0 (down) is never touched: the vanilla (here struck at 90), the rebate never paid",
)
_AWAY_IN = Reduction(
    "barrier_out_of_reach",
    {"barrier": _out_of_reach, "strike": 90.0, "rebate": REBATE},
    becomes=_rebate_at_expiry,
    note="H at inf (up) or 0 (down) is never touched: never knocked in, the rebate at T",
)
_TOUCHED_TODAY_OUT = Reduction(
    "touched_today",
    {"barrier": SPOT, "strike": _live_side, "rebate": REBATE, "rebate_at_hit": 0},
    model_changes={"spot": SPOT},
    becomes=_rebate_at_expiry,
    note="H at the spot is touched today: knocked out at once, the rebate (here paid at T); "
    "the strike 10 on the live side",
)
_TOUCHED_TODAY_IN = Reduction(
    "touched_today",
    {"barrier": SPOT, "strike": _live_side, "rebate": REBATE},
    model_changes={"spot": SPOT},
    becomes=_vanilla,
    note="H at the spot is touched today: knocked in at once, the vanilla (no rebate), struck 10 "
    "on the live side of the barrier",
)
_TOUCHED_TODAY_PAID_NOW = Reduction(
    "touched_today_rebate_paid_now",
    {"barrier": SPOT, "strike": _live_side, "rebate": REBATE, "rebate_at_hit": 1},
    model_changes={"spot": SPOT},
    becomes=_rebate_at_expiry,
    reference_model=lambda model, p: model.replace(rate=0.0),
    note="H at the spot, rebate paid at the touch: R paid today, worth R (the bond paying R, "
    "priced at zero rate)",
)
_IN_PLUS_OUT = Identity(
    "in_plus_out_is_vanilla",
    lambda p: [(1.0, p.replace(rebate=0.0)), (1.0, _sibling(p, out=not p.out, rebate=0.0)), (-1.0, _vanilla(p))],
    note="without rebates, knock-in + knock-out = vanilla on every path",
)
_IN_PLUS_OUT_REBATES = Identity(
    "in_plus_out_with_rebates",
    lambda p: [
        (1.0, _near_with_rebate_at_expiry(p)),
        (1.0, _near_with_rebate_at_expiry(_sibling(p, out=not p.out))),
        (-1.0, _vanilla(p)),
        (-1.0, ZeroCouponBond(cash=REBATE, maturity=p.maturity)),
    ],
    note="rebates R at T, barrier 1 from the spot: exactly one of knock-in and knock-out pays R, "
    "so in + out = vanilla + R",
)
_BELOW_VANILLA = Bound(
    "at_most_vanilla",
    "<=",
    lambda p, m: _vanilla(p).reference(m),
    pathwise_leg=_vanilla,
    source="the vanilla's Black-Scholes price (without a rebate a barrier option pays the vanilla or nothing)",
)


def _closed_form(name: str, changes: dict, note: str, **kw) -> Reduction:
    return own_closed_form(name, changes, allowance=_hit_timing, reason=HIT_TIMING_REASON, note=note, **kw)


_CLOSED_FORMS = (
    _closed_form("closed_form", {}, "Reiner-Rubinstein closed form, no rebate"),
    _closed_form("closed_form_rebate", {"rebate": REBATE}, "Reiner-Rubinstein closed form, rebate 3"),
    _closed_form("closed_form_one_interval", {"steps": 1},
                 "one simulation interval [0, T]: the bridge alone decides, the price is unchanged"),
    _closed_form("closed_form_haug_cell", {"strike": 90.0, "rebate": REBATE}, "Haug's table, K = 90, sigma = 0.30",
                 model_changes={"vol": 0.30}),
)
_CLOSED_FORMS_OUT = (
    _closed_form("closed_form_rebate_at_expiry", {"rebate": REBATE, "rebate_at_hit": 0},
                 "Reiner-Rubinstein closed form, rebate 3 paid at T"),
    _closed_form("rebate_only", {"strike": _no_vanilla, "rebate": REBATE},
                 "strike out of reach: only the rebate, paid at the touch (the F term)"),
)


class _Barrier(Product):
    abstract = True
    up: ClassVar[bool]
    out: ClassVar[bool]
    call: ClassVar[bool]
    continuous: ClassVar[bool]

    strike = Param(100.0, low=0.0, doc="strike")
    rebate = Param(0.0, low=0.0, doc="cash rebate R (see the class docstring for when it is paid)")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    def payoff(self, obs):
        untouched = self.untouched(obs)
        alive = untouched[:, -1]
        s_end = obs.s[:, -1]
        vanilla = np.maximum(s_end - self.strike, 0.0) if self.call else np.maximum(self.strike - s_end, 0.0)
        if not self.out:
            return vanilla * (1.0 - alive) + self.rebate * alive
        if not self.rebate_at_hit:
            return vanilla * alive + self.rebate * (1.0 - alive)
        first_touch = -np.diff(untouched, axis=1, prepend=1.0)  # today, then each date's interval
        times = np.concatenate([[0.0], obs.t, obs.t[-1:]])
        return Cashflows(np.column_stack([self.rebate * first_touch, vanilla * alive]), times)

    def untouched(self, obs) -> np.ndarray:
        """Probability, given the simulated path, that the barrier is not touched up to
        today (column 0) and up to each date (columns 1..n): shape ``(paths, n + 1)``."""
        s = np.column_stack([np.full(obs.paths, obs.s0), obs.s])
        stay = (s < self.barrier if self.up else s > self.barrier).astype(float)
        if self.continuous:
            with np.errstate(divide="ignore", invalid="ignore", over="ignore"):  # a zero or tiny step variance
                d = np.log(s / self.barrier)  # signed log-distance to the barrier
                gap = d[:, :-1] * d[:, 1:]  # > 0 when both ends lie on the same side
                bridge = np.where(gap > 0.0, -np.expm1(-2.0 * gap / obs.step_var), 0.0)
            stay[:, 1:] *= bridge
        return running(np.multiply, stay)  # np.cumprod(stay, axis=1), fast on the engine's layout


class _Discrete(_Barrier):
    abstract = True
    continuous = False
    monitoring = Param(52, low=1, high=10_000, integer=True, doc="monitoring dates T/n, ..., T (and today)")

    def dates(self) -> np.ndarray:
        return even_dates(self.maturity, self.monitoring)

    def formula(self):
        """The amount paid (timing aside): the vanilla if the barrier is never touched
        today or on a date (knock-out), else the rebate; the other way round for a knock-in."""
        x = formula_symbols(self)
        stay = sp.And(*[(s < x.barrier) if self.up else (s > x.barrier) for s in (x.S_0, *x.S)])
        vanilla = sp.Max(x.S_T - x.strike, 0) if self.call else sp.Max(x.strike - x.S_T, 0)
        if self.out:
            return sp.Piecewise((vanilla, stay), (x.rebate, True))
        return sp.Piecewise((x.rebate, stay), (vanilla, True))

    def reference(self, model):
        """Recursive quadrature over the monitoring dates (Andricopoulos, Widdicks, Duck and
        Newton 2003), the dates rebuilt from the terms (``monitoring`` equal steps to T);
        a spot on the barrier's far side today is knocked today (the product's rule)."""
        spot, rate, dividend, vol = bs_inputs(model, self)
        touched = spot >= self.barrier if self.up else spot <= self.barrier
        if touched:
            if self.out:
                paid_now = bool(getattr(self, "rebate_at_hit", 0))
                return self.rebate * (1.0 if paid_now else math.exp(-rate * self.maturity))
            return float(black_scholes(spot, self.strike, self.maturity, rate, dividend, vol,
                                       "call" if self.call else "put"))
        return float(discrete_barrier_by_quadrature(
            _kind(self), spot, self.strike, self.barrier, equal_steps(self.maturity, self.monitoring),
            self.maturity, rate, dividend, vol, rebate=self.rebate,
            rebate_at_hit=bool(getattr(self, "rebate_at_hit", 0)),
        ))

    def reference_source(self) -> str:
        return "recursive quadrature over the monitoring dates (Andricopoulos et al. 2003)"


class _Continuous(_Barrier):
    abstract = True
    continuous = True
    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(0.5, low=0.0, low_open=True, doc="expiry in years")
    steps = Param(25, low=1, high=10_000, integer=True,
                  doc="simulated dates T/n, ..., T; the Brownian bridge covers the time between them")

    def dates(self) -> np.ndarray:
        return even_dates(self.maturity, self.steps)

    def scenario(self):
        return HAUG_SCENARIO

    def reference(self, model):
        spot, rate, dividend, vol = bs_inputs(model, self)
        at_hit = self.out and bool(self.rebate_at_hit)
        return barrier_option(_kind(self), spot, self.strike, self.barrier, self.maturity, rate, dividend, vol,
                              rebate=self.rebate, rebate_at_hit=at_hit)

    def reference_source(self) -> str:
        return "Reiner-Rubinstein closed form"


def _timing() -> Param:
    return Param(1, low=0, high=1, integer=True, doc="1: rebate paid when the barrier is touched; 0: at T")


def _up_barrier(default: float) -> Param:
    return Param(default, low=0.0, low_open=True, high=math.inf, doc="barrier above the spot (inf: never touched)")


def _down_barrier(default: float) -> Param:
    return Param(default, low=0.0, doc="barrier below the spot (0: never touched)")


_DISCRETE_CLOSED_FORM = own_closed_form(
    note="Monte Carlo on the monitoring dates against recursive quadrature over the same dates "
         "(rebuilt from the terms), at the product's own parameters",
)


class _DiscreteOut(_Discrete):
    abstract = True
    out = True
    rebate_at_hit = _timing()
    reductions = (_AWAY_OUT, _TOUCHED_TODAY_OUT, _TOUCHED_TODAY_PAID_NOW, _DISCRETE_CLOSED_FORM)
    relations = (
        _IN_PLUS_OUT,
        _IN_PLUS_OUT_REBATES,
        MovingAway(),
        _BELOW_VANILLA,
        Bound(
            "at_least_continuous",
            ">=",
            lambda p, m: _sibling(p, continuous=True).reference(m),
            pathwise_leg=lambda p: _sibling(p, continuous=True),
            source="the continuous knock-out's closed form (a continuous barrier is touched whenever a discrete one is)",
        ),
        Tie("barrier", _TOUCHED),
    )


class _DiscreteIn(_Discrete):
    abstract = True
    out = False
    reductions = (_AWAY_IN, _TOUCHED_TODAY_IN, _DISCRETE_CLOSED_FORM)
    relations = (
        _IN_PLUS_OUT,
        _IN_PLUS_OUT_REBATES,
        MovingAway(),
        _BELOW_VANILLA,
        Bound(
            "at_most_continuous",
            "<=",
            lambda p, m: _sibling(p, continuous=True).reference(m),
            pathwise_leg=lambda p: _sibling(p, continuous=True),
            source="the continuous knock-in's closed form (a continuous barrier is touched whenever a discrete one is)",
        ),
        Tie("barrier", _TOUCHED),
    )


class _ContinuousOut(_Continuous):
    abstract = True
    out = True
    rebate_at_hit = _timing()
    reductions = (_AWAY_OUT, _TOUCHED_TODAY_OUT, _TOUCHED_TODAY_PAID_NOW) + _CLOSED_FORMS + _CLOSED_FORMS_OUT
    relations = (_IN_PLUS_OUT, _IN_PLUS_OUT_REBATES, MovingAway(), _BELOW_VANILLA)


class _ContinuousIn(_Continuous):
    abstract = True
    out = False
    reductions = (_AWAY_IN, _TOUCHED_TODAY_IN) + _CLOSED_FORMS
    relations = (_IN_PLUS_OUT, _IN_PLUS_OUT_REBATES, MovingAway(), _BELOW_VANILLA)


# --- discretely monitored ----------------------------------------------------------------


class UpAndOutCall(_DiscreteOut):
    """Pays max(S(T) - K, 0) at T unless S >= H today or on a monitoring date; then the
    rebate R (on that date, or at T).

    Limits: H -> inf: the European call. H at the spot: knocked today, R only.
    """

    up, call = True, True
    barrier = _up_barrier(140.0)


class DownAndOutCall(_DiscreteOut):
    """Pays max(S(T) - K, 0) at T unless S <= H today or on a monitoring date; then the
    rebate R (on that date, or at T).

    Limits: H -> 0: the European call. H at the spot: knocked today, R only.
    """

    up, call = False, True
    barrier = _down_barrier(80.0)


class UpAndOutPut(_DiscreteOut):
    """Pays max(K - S(T), 0) at T unless S >= H today or on a monitoring date; then the
    rebate R (on that date, or at T).

    Limits: H -> inf: the European put. H at the spot: knocked today, R only.
    """

    up, call = True, False
    barrier = _up_barrier(140.0)


class DownAndOutPut(_DiscreteOut):
    """Pays max(K - S(T), 0) at T unless S <= H today or on a monitoring date; then the
    rebate R (on that date, or at T).

    Limits: H -> 0: the European put. H at the spot: knocked today, R only.
    """

    up, call = False, False
    barrier = _down_barrier(80.0)


class UpAndInCall(_DiscreteIn):
    """Pays max(S(T) - K, 0) at T if S >= H today or on a monitoring date; else the
    rebate R at T.

    Limits: H -> inf: never knocked in, R at T. H at the spot: the European call.
    """

    up, call = True, True
    barrier = _up_barrier(140.0)


class DownAndInCall(_DiscreteIn):
    """Pays max(S(T) - K, 0) at T if S <= H today or on a monitoring date; else the
    rebate R at T.

    Limits: H -> 0: never knocked in, R at T. H at the spot: the European call.
    """

    up, call = False, True
    barrier = _down_barrier(80.0)


class UpAndInPut(_DiscreteIn):
    """Pays max(K - S(T), 0) at T if S >= H today or on a monitoring date; else the
    rebate R at T.

    Limits: H -> inf: never knocked in, R at T. H at the spot: the European put.
    """

    up, call = True, False
    barrier = _up_barrier(140.0)


class DownAndInPut(_DiscreteIn):
    """Pays max(K - S(T), 0) at T if S <= H today or on a monitoring date; else the
    rebate R at T.

    Limits: H -> 0: never knocked in, R at T. H at the spot: the European put.
    """

    up, call = False, False
    barrier = _down_barrier(80.0)


# --- continuously monitored ----------------------------------------------------------------


class UpAndOutCallContinuous(_ContinuousOut):
    """Pays max(S(T) - K, 0) at T unless S touches H >= S0 at any time before T; then the
    rebate R (at the touch, or at T).

    Limits: H -> inf: the European call. H at the spot: knocked today, R only.
    Closed form: Reiner-Rubinstein (Haug's table: H = 105, K = 100, sigma = 0.25, R = 3: 2.3580).
    """

    up, call = True, True
    barrier = _up_barrier(105.0)


class DownAndOutCallContinuous(_ContinuousOut):
    """Pays max(S(T) - K, 0) at T unless S touches H <= S0 at any time before T; then the
    rebate R (at the touch, or at T).

    Limits: H -> 0: the European call. H at the spot: knocked today, R only.
    Closed form: Reiner-Rubinstein (Haug's table: H = 95, K = 100, sigma = 0.25, R = 3: 6.7924).
    """

    up, call = False, True
    barrier = _down_barrier(95.0)


class UpAndOutPutContinuous(_ContinuousOut):
    """Pays max(K - S(T), 0) at T unless S touches H >= S0 at any time before T; then the
    rebate R (at the touch, or at T).

    Limits: H -> inf: the European put. H at the spot: knocked today, R only.
    Closed form: Reiner-Rubinstein (Haug's table: H = 105, K = 100, sigma = 0.25, R = 3: 5.4932).
    """

    up, call = True, False
    barrier = _up_barrier(105.0)


class DownAndOutPutContinuous(_ContinuousOut):
    """Pays max(K - S(T), 0) at T unless S touches H <= S0 at any time before T; then the
    rebate R (at the touch, or at T).

    Limits: H -> 0: the European put. H at the spot: knocked today, R only.
    Closed form: Reiner-Rubinstein (Haug's table: H = 95, K = 100, sigma = 0.25, R = 3: 2.2947).
    """

    up, call = False, False
    barrier = _down_barrier(95.0)


class UpAndInCallContinuous(_ContinuousIn):
    """Pays max(S(T) - K, 0) at T if S touches H >= S0 at some time before T; else the
    rebate R at T.

    Limits: H -> inf: never knocked in, R at T. H at the spot: the European call.
    Closed form: Reiner-Rubinstein (Haug's table: H = 105, K = 100, sigma = 0.25, R = 3: 8.4482).
    """

    up, call = True, True
    barrier = _up_barrier(105.0)


class DownAndInCallContinuous(_ContinuousIn):
    """Pays max(S(T) - K, 0) at T if S touches H <= S0 at some time before T; else the
    rebate R at T.

    Limits: H -> 0: never knocked in, R at T. H at the spot: the European call.
    Closed form: Reiner-Rubinstein (Haug's table: H = 95, K = 100, sigma = 0.25, R = 3: 4.0109).
    """

    up, call = False, True
    barrier = _down_barrier(95.0)


class UpAndInPutContinuous(_ContinuousIn):
    """Pays max(K - S(T), 0) at T if S touches H >= S0 at some time before T; else the
    rebate R at T.

    Limits: H -> inf: never knocked in, R at T. H at the spot: the European put.
    Closed form: Reiner-Rubinstein (Haug's table: H = 105, K = 100, sigma = 0.25, R = 3: 3.3721).
    """

    up, call = True, False
    barrier = _up_barrier(105.0)


class DownAndInPutContinuous(_ContinuousIn):
    """Pays max(K - S(T), 0) at T if S touches H <= S0 at some time before T; else the
    rebate R at T.

    Limits: H -> 0: never knocked in, R at T. H at the spot: the European put.
    Closed form: Reiner-Rubinstein (Haug's table: H = 95, K = 100, sigma = 0.25, R = 3: 6.5677).
    """

    up, call = False, False
    barrier = _down_barrier(95.0)


FAMILY: dict[tuple[bool, bool, bool, bool], type[_Barrier]] = {
    (c.up, c.out, c.call, c.continuous): c
    for c in (
        UpAndOutCall, DownAndOutCall, UpAndOutPut, DownAndOutPut,
        UpAndInCall, DownAndInCall, UpAndInPut, DownAndInPut,
        UpAndOutCallContinuous, DownAndOutCallContinuous, UpAndOutPutContinuous, DownAndOutPutContinuous,
        UpAndInCallContinuous, DownAndInCallContinuous, UpAndInPutContinuous, DownAndInPutContinuous,
    )
}
"""Every barrier option by (up, out, call, continuous)."""
