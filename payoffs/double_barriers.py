"""Double-barrier options: knock-out or knock-in, call or put, between a lower barrier L and
an upper barrier U, monitored today and on n equally spaced dates, with a cash rebate at T.

Payoff. With vanilla = max(S(T) - K, 0) (call) or max(K - S(T), 0) (put), the option is
*alive* if L < S < U today and on every monitoring date T/n, ..., T (a barrier is touched
when S <= L or S >= U). A *knock-out* pays the vanilla at T if alive, else the rebate R at
T; a *knock-in* pays the vanilla at T if not alive, else R at T.

Reference. Under Black-Scholes the price is computed by recursive quadrature of the
log-price density over the monitoring dates (Andricopoulos, Widdicks, Duck and Newton,
"Universal option valuation using quadrature methods", J. Financial Economics 67(3), 2003,
via :func:`limitcase.references.discrete_double_barrier_by_quadrature`), accurate to better
than 1e-9 per unit of spot. The monitoring dates given to it are built from the terms
(maturity and number of dates), not read from ``dates()``.

Checks. Limits: both barriers out of reach (L = 0, U = inf) give the vanilla (knock-out) or
the rebate at T (knock-in); removing one barrier gives the single-barrier option of
:mod:`limitcase_payoffs.barriers` on the same dates, path by path; a lower barrier at the
spot knocks today. The quadrature reference at the defaults, with a rebate, and on a single
monitoring date (where the option is a European payoff restricted to the corridor).
Relations, path by path: in + out = vanilla; without a rebate a double barrier option pays
at most the vanilla; a knock-out is worth more, a knock-in less, as the corridor widens.

Continuous monitoring (``DoubleKnockOutCallContinuous``, ...): the corridor is watched at
every instant. The simulation weights each path by the probability that the Brownian bridge
between consecutive simulated log-prices stays inside (log L, log U) (a series of images,
:func:`strip_survival`), exact for geometric Brownian motion. Reference: the Ikeda-Kunitomo
series (N. Kunitomo and M. Ikeda, "Pricing Options with Curved Boundaries", Mathematical
Finance 2(4), 1992, flat barriers, via :func:`limitcase.references.double_barrier_option`).
Same limits and relations, plus: one simulation interval gives the same price (the bridge
decides alone), removing a barrier gives the continuous single-barrier option, and a
continuous knock-out is worth at most (a knock-in at least) the same option watched on the
simulated dates only, path by path.
"""

from __future__ import annotations

import math
from typing import ClassVar

import numpy as np

from limitcase import Bound, Identity, Monotone, Param, ParamError, Product, Reduction, Tie
from limitcase.references import black_scholes, discrete_double_barrier_by_quadrature, double_barrier_option
from limitcase.references.schedules import equal_steps

from ._common import bs_inputs, even_dates, own_closed_form
from .barriers import DownAndInCall, DownAndInPut, DownAndOutCall, DownAndOutPut
from .barriers import DownAndInCallContinuous, DownAndInPutContinuous, DownAndOutCallContinuous
from .barriers import DownAndOutPutContinuous, UpAndInCallContinuous, UpAndInPutContinuous
from .barriers import UpAndInCall, UpAndInPut, UpAndOutCall, UpAndOutPut
from .barriers import UpAndOutCallContinuous, UpAndOutPutContinuous
from .vanilla import EuropeanCall, EuropeanPut, ZeroCouponBond

SPOT = 100.0
"""The spot of the scenario (the default Black-Scholes model); a lower barrier placed here is
touched today."""

REBATE = 3.0
"""The rebate of the checks that pay one."""

_SINGLE = {
    # (out, call, side kept) -> single-barrier class on the same dates
    (True, True, "upper"): UpAndOutCall,
    (True, False, "upper"): UpAndOutPut,
    (False, True, "upper"): UpAndInCall,
    (False, False, "upper"): UpAndInPut,
    (True, True, "lower"): DownAndOutCall,
    (True, False, "lower"): DownAndOutPut,
    (False, True, "lower"): DownAndInCall,
    (False, False, "lower"): DownAndInPut,
}


def _vanilla(p: "_DoubleBarrier") -> Product:
    return (EuropeanCall if p.call else EuropeanPut)(strike=p.strike, maturity=p.maturity)


def _single(p: "_DoubleBarrier", side: str) -> Product:
    cls = _SINGLE[(p.out, p.call, side)]
    values = {
        "strike": p.strike,
        "barrier": p.upper if side == "upper" else p.lower,
        "rebate": p.rebate,
        "maturity": p.maturity,
        "monitoring": p.monitoring,
    }
    if p.out:
        values["rebate_at_hit"] = 0  # the rebate of a double barrier is paid at T
    return cls(**values)


def _sibling(p: "_DoubleBarrier", **changes) -> "_DoubleBarrier":
    cls = FAMILY[(not p.out, p.call)]
    values = {k: getattr(p, k) for k in ("strike", "lower", "upper", "rebate", "maturity", "monitoring")}
    values.update(changes)
    return cls(**values)


def _wider(p: "_DoubleBarrier") -> float:
    return p.upper + 15.0


class _DoubleBarrier(Product):
    abstract = True
    out: ClassVar[bool]
    call: ClassVar[bool]

    strike = Param(100.0, low=0.0, doc="strike")
    lower = Param(80.0, low=0.0, doc="lower barrier L below the spot (0: none)")
    upper = Param(125.0, low=0.0, low_open=True, high=math.inf, doc="upper barrier U above the spot (inf: none)")
    rebate = Param(0.0, low=0.0, doc="cash paid at T when the vanilla is not paid")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")
    monitoring = Param(12, low=1, high=10_000, integer=True, doc="monitoring dates T/n, ..., T (and today)")

    def _check(self) -> None:
        if not self.lower < self.upper:
            raise ParamError(
                f"lower={self.lower!r} is not below upper={self.upper!r} for {type(self).__name__}; "
                f"pass lower < upper"
            )

    def dates(self) -> np.ndarray:
        return even_dates(self.maturity, self.monitoring)

    def payoff(self, obs):
        s = np.column_stack([np.full(obs.paths, obs.s0), obs.s])
        alive = np.all((s > self.lower) & (s < self.upper), axis=1)
        s_end = obs.s[:, -1]
        vanilla = np.maximum(s_end - self.strike, 0.0) if self.call else np.maximum(self.strike - s_end, 0.0)
        if self.out:
            return np.where(alive, vanilla, self.rebate)
        return np.where(alive, self.rebate, vanilla)

    def reference(self, model):
        spot, rate, dividend, vol = bs_inputs(model, self)
        kind = f"knock-{'out' if self.out else 'in'}-{'call' if self.call else 'put'}"
        if not self.lower < spot < self.upper:  # touched today
            if self.out:
                return self.rebate * math.exp(-rate * self.maturity)
            return black_scholes(spot, self.strike, self.maturity, rate, dividend, vol, "call" if self.call else "put")
        # the monitoring dates from the terms: n equal steps up to the maturity
        times = equal_steps(self.maturity, self.monitoring)
        return discrete_double_barrier_by_quadrature(
            kind, spot, self.strike, self.lower, self.upper, times, self.maturity, rate, dividend, vol,
            rebate=self.rebate, rebate_at_hit=False,
        )

    def reference_source(self) -> str:
        return "recursive quadrature over the monitoring dates"


_CLOSED_FORMS = (
    own_closed_form(note="recursive quadrature over the 12 monitoring dates"),
    own_closed_form("closed_form_rebate", {"rebate": REBATE}, note="the same with a rebate of 3 at T"),
    own_closed_form(
        "closed_form_one_date",
        {"monitoring": 1, "rebate": REBATE},
        note="one monitoring date (and today): a European payoff, the vanilla inside the corridor at T",
    ),
)
def _on_upper(value):
    return Reduction(
        "on_the_upper_barrier",
        {"lower": 0.5, "upper": 1.0, "strike": 1.0, "rebate": REBATE},
        model_changes={"spot": 1.0, "vol": 0.0, "dividend": 0.05},
        becomes=value,
        note="spot 1, zero vol and dividend = rate (0.05): S = exp(0) = 1 exactly on every date, on U = 1, "
        "which touches it (S >= U): knocked today",
    )


_IN_PLUS_OUT = Identity(
    "in_plus_out_is_vanilla",
    lambda p: [(1.0, p.replace(rebate=0.0)), (1.0, _sibling(p, rebate=0.0)), (-1.0, _vanilla(p))],
    note="without rebates, knock-in + knock-out = vanilla on every path",
)
_BELOW_VANILLA = Bound(
    "at_most_vanilla",
    "<=",
    lambda p, m: _vanilla(p).reference(m),
    pathwise_leg=_vanilla,
    source="the vanilla's Black-Scholes price (without a rebate the option pays the vanilla or nothing)",
)
_NO_LOWER = Identity(
    "no_lower_barrier",
    lambda p: [(1.0, p.replace(lower=0.0, rebate=REBATE)), (-1.0, _single(p.replace(lower=0.0, rebate=REBATE), "upper"))],
    note="L = 0 is never touched: the single up-barrier option on the same dates (rebate 3 at T), "
    "on every path",
)
_NO_UPPER = Identity(
    "no_upper_barrier",
    lambda p: [(1.0, p.replace(upper=math.inf, rebate=REBATE)),
               (-1.0, _single(p.replace(upper=math.inf, rebate=REBATE), "lower"))],
    note="U = inf is never touched: the single down-barrier option on the same dates (rebate 3 at T), "
    "on every path",
)


# --- declarations shared by the discrete and the continuous double barriers -------------

_AWAY_OUT = Reduction(
    "corridor_out_of_reach",
    {"lower": 0.0, "upper": math.inf, "rebate": REBATE},
    becomes=_vanilla,
    note="L = 0 and U = inf are never touched: the vanilla, the rebate never paid",
)
_TODAY_OUT = Reduction(
    "touched_today",
    {"lower": SPOT, "rebate": REBATE},
    model_changes={"spot": SPOT},
    becomes=lambda p: ZeroCouponBond(cash=REBATE, maturity=p.maturity),
    note="L at the spot is touched today: knocked out at once, the rebate at T",
)
_AWAY_IN = Reduction(
    "corridor_out_of_reach",
    {"lower": 0.0, "upper": math.inf, "rebate": REBATE},
    becomes=lambda p: ZeroCouponBond(cash=REBATE, maturity=p.maturity),
    note="L = 0 and U = inf are never touched: never knocked in, the rebate at T",
)
_TODAY_IN = Reduction(
    "touched_today",
    {"lower": SPOT, "rebate": REBATE},
    model_changes={"spot": SPOT},
    becomes=_vanilla,
    note="L at the spot is touched today: knocked in at once, the vanilla",
)
_WIDER_WORTH_MORE = Monotone("upper", +1, to=_wider, pathwise=True, name="worth_more_as_corridor_widens")
_WIDER_WORTH_LESS = Monotone("upper", -1, to=_wider, pathwise=True, name="worth_less_as_corridor_widens")


class _KnockOut(_DoubleBarrier):
    abstract = True
    out = True
    reductions = (
        _AWAY_OUT,
        _TODAY_OUT,
        _on_upper(lambda p: ZeroCouponBond(cash=REBATE, maturity=p.maturity)),
    ) + _CLOSED_FORMS
    relations = (
        _NO_LOWER,
        _NO_UPPER,
        _IN_PLUS_OUT,
        _BELOW_VANILLA,
        _WIDER_WORTH_MORE,
        Tie("lower", "below"), Tie("upper", "above"),
    )


class _KnockIn(_DoubleBarrier):
    abstract = True
    out = False
    reductions = (
        _AWAY_IN,
        _TODAY_IN,
        _on_upper(_vanilla),
    ) + _CLOSED_FORMS
    relations = (
        _NO_LOWER,
        _NO_UPPER,
        _IN_PLUS_OUT,
        _BELOW_VANILLA,
        _WIDER_WORTH_LESS,
        Tie("lower", "below"), Tie("upper", "above"),
    )


class DoubleKnockOutCall(_KnockOut):
    """Pays max(S(T) - K, 0) at T if L < S < U today and on every monitoring date; else the
    rebate R at T.

    Limits: L -> 0 and U -> inf: the European call; L -> 0: the up-and-out call; U -> inf:
    the down-and-out call; L at the spot: R only.
    """

    call = True


class DoubleKnockOutPut(_KnockOut):
    """Pays max(K - S(T), 0) at T if L < S < U today and on every monitoring date; else the
    rebate R at T.

    Limits: L -> 0 and U -> inf: the European put; L -> 0: the up-and-out put; U -> inf:
    the down-and-out put; L at the spot: R only.
    """

    call = False


class DoubleKnockInCall(_KnockIn):
    """Pays max(S(T) - K, 0) at T if S <= L or S >= U today or on some monitoring date;
    else the rebate R at T.

    Limits: L -> 0 and U -> inf: R at T; L -> 0: the up-and-in call; U -> inf: the
    down-and-in call; L at the spot: the European call.
    """

    call = True


class DoubleKnockInPut(_KnockIn):
    """Pays max(K - S(T), 0) at T if S <= L or S >= U today or on some monitoring date;
    else the rebate R at T.

    Limits: L -> 0 and U -> inf: R at T; L -> 0: the up-and-in put; U -> inf: the
    down-and-in put; L at the spot: the European put.
    """

    call = False


FAMILY: dict[tuple[bool, bool], type[_DoubleBarrier]] = {
    (c.out, c.call): c for c in (DoubleKnockOutCall, DoubleKnockOutPut, DoubleKnockInCall, DoubleKnockInPut)
}


# --- continuously monitored ----------------------------------------------------------------

_SINGLE_CONTINUOUS = {
    (True, True, "upper"): UpAndOutCallContinuous,
    (True, False, "upper"): UpAndOutPutContinuous,
    (False, True, "upper"): UpAndInCallContinuous,
    (False, False, "upper"): UpAndInPutContinuous,
    (True, True, "lower"): DownAndOutCallContinuous,
    (True, False, "lower"): DownAndOutPutContinuous,
    (False, True, "lower"): DownAndInCallContinuous,
    (False, False, "lower"): DownAndInPutContinuous,
}


_CUT = 200.0
"""Image terms of :func:`strip_survival` bounded by exp(-_CUT) on every element are skipped.
Far below what a double resolves (e^-40 would do): the slack keeps a small error in the bound
itself harmless instead of silently dropping terms that move the price by 1e-5."""


def strip_survival(x: np.ndarray, y: np.ndarray, var: np.ndarray, lower: float, upper: float) -> np.ndarray:
    """Probability that a Brownian bridge from log-price ``x`` to ``y`` with variance ``var``
    stays inside (log L, log U), both ends inside (method of images):

        sum_n exp(-2 n w (n w - (y - x)) / var) - exp(-2 (b - x + n w)(b - y + n w) / var),

    with b = log U, w = log U - log L; one barrier absent leaves the n = 0 term of the other.
    Zero where an end lies outside."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        a = math.log(lower) if lower > 0.0 else -math.inf
        b = math.log(upper) if math.isfinite(upper) else math.inf
        inside = (x > a) & (x < b) & (y > a) & (y < b)
        if math.isinf(a) and math.isinf(b):
            p = np.ones(np.broadcast(x, y, var).shape)
        elif math.isinf(a):
            p = -np.expm1(-2.0 * (b - x) * (b - y) / var)
        elif math.isinf(b):
            p = -np.expm1(-2.0 * (x - a) * (y - a) / var)
        else:
            w = b - a
            d = y - x
            # With both ends inside, 0 < b - x, b - y < w bound the exponents: term 1 by
            # -2|n| w (|n| w - max|y - x|) / var, term 2 by -2 n^2 w^2 / var (n >= 0) or
            # -2 (|n| - 1)^2 w^2 / var (n < 0). A term whose bound is below -_CUT everywhere
            # (under e^-200) is skipped: the bounds fall faster than geometrically in |n|, so
            # all that is skipped sums to far less than the rounding of a probability near 1.
            # On short steps only n = 0 of term 1 and n = 0, -1 of term 2 remain.
            top = float(np.max(var))
            if not top > 0.0:  # no variance on any step: the bridge is the straight line between the ends
                return np.where(inside, 1.0, 0.0)
            scale = 2.0 * w * w / top
            reach = float(np.max(np.abs(d), where=inside, initial=0.0)) / w
            n_max = 1 + int(math.ceil(math.sqrt(_CUT / scale))) + int(math.ceil(reach))
            p = np.zeros(np.broadcast(x, y, var).shape)
            for n in range(-n_max, n_max + 1):
                m = abs(n)
                if m * (m - reach) * scale <= _CUT:
                    p = p + np.exp(-2.0 * n * w * (n * w - d) / var)
                if (n * n if n >= 0 else (m - 1) ** 2) * scale <= _CUT:
                    p = p - np.exp(-2.0 * (b - x + n * w) * (b - y + n * w) / var)
            if float(np.min(var)) <= 0.0:  # a step without variance: the straight line stays inside
                p = np.where(var > 0.0, p, 1.0)
        return np.where(inside, np.clip(np.nan_to_num(p, nan=0.0), 0.0, 1.0), 0.0)


def _single_continuous(p: "_DoubleContinuous", side: str) -> Product:
    cls = _SINGLE_CONTINUOUS[(p.out, p.call, side)]
    values = {"strike": p.strike, "barrier": p.upper if side == "upper" else p.lower, "rebate": p.rebate,
              "maturity": p.maturity, "steps": p.steps}
    if p.out:
        values["rebate_at_hit"] = 0
    return cls(**values)


def _sibling_continuous(p: "_DoubleContinuous", **changes) -> "_DoubleContinuous":
    cls = FAMILY_CONTINUOUS[(not p.out, p.call)]
    values = {k: getattr(p, k) for k in ("strike", "lower", "upper", "rebate", "maturity", "steps")}
    values.update(changes)
    return cls(**values)


def _discrete_twin(p: "_DoubleContinuous") -> "_DoubleBarrier":
    """The same option watched on its simulated dates only (and today)."""
    cls = FAMILY[(p.out, p.call)]
    return cls(strike=p.strike, lower=p.lower, upper=p.upper, rebate=p.rebate, maturity=p.maturity,
               monitoring=p.steps)


class _DoubleContinuous(Product):
    abstract = True
    out: ClassVar[bool]
    call: ClassVar[bool]

    strike = Param(100.0, low=0.0, doc="strike")
    lower = Param(80.0, low=0.0, doc="lower barrier L below the spot (0: none)")
    upper = Param(120.0, low=0.0, low_open=True, high=math.inf, doc="upper barrier U above the spot (inf: none)")
    rebate = Param(0.0, low=0.0, doc="cash paid at T when the vanilla is not paid")
    maturity = Param(0.25, low=0.0, low_open=True, doc="expiry in years")
    steps = Param(25, low=1, high=10_000, integer=True,
                  doc="simulated dates T/n, ..., T; the Brownian bridge covers the time between them")

    def _check(self) -> None:
        if not self.lower < self.upper:
            raise ParamError(
                f"lower={self.lower!r} is not below upper={self.upper!r} for {type(self).__name__}; "
                f"pass lower < upper"
            )

    def dates(self) -> np.ndarray:
        return even_dates(self.maturity, self.steps)

    def alive(self, obs) -> np.ndarray:
        """Probability, given the simulated path, that S stays in (L, U) over [0, T]."""
        logs = np.log(np.column_stack([np.full(obs.paths, obs.s0), obs.s]))
        stay = strip_survival(logs[:, :-1], logs[:, 1:], obs.step_var, self.lower, self.upper)
        return np.prod(stay, axis=1)

    def payoff(self, obs):
        alive = self.alive(obs)
        s_end = obs.s[:, -1]
        vanilla = np.maximum(s_end - self.strike, 0.0) if self.call else np.maximum(self.strike - s_end, 0.0)
        if self.out:
            return vanilla * alive + self.rebate * (1.0 - alive)
        return vanilla * (1.0 - alive) + self.rebate * alive

    def reference(self, model):
        spot, rate, dividend, vol = bs_inputs(model, self)
        kind = f"knock-{'out' if self.out else 'in'}-{'call' if self.call else 'put'}"
        return double_barrier_option(kind, spot, self.strike, self.lower, self.upper, self.maturity,
                                     rate, dividend, vol, rebate=self.rebate)

    def reference_source(self) -> str:
        return "Ikeda-Kunitomo series"


_CONTINUOUS_CLOSED_FORMS = (
    own_closed_form(note="Ikeda-Kunitomo series (flat barriers), the Haug table setting L=80, U=120"),
    own_closed_form("closed_form_rebate", {"rebate": REBATE}, note="the same with a rebate of 3 at T"),
    own_closed_form("closed_form_one_step", {"steps": 1},
                    note="one simulation interval [0, T]: the bridge alone decides, the price is unchanged"),
    own_closed_form("closed_form_narrow_one_step", {"steps": 1, "lower": 90.0, "upper": 110.0, "maturity": 1.0},
                    model_changes={"vol": 0.3},
                    note="one interval of a year across a corridor of +-10%: the bridge's images beyond the "
                    "first (n != 0) carry much of the survival probability"),
    own_closed_form("closed_form_haug_cell", {}, model_changes={"vol": 0.25, "rate": 0.1, "dividend": 0.0},
                    note="the setting of Haug's double-barrier table: S=K=100, L=80, U=120, T=0.25, "
                    "sigma=0.25, r=b=0.1"),
)
_NO_LOWER_C = Identity(
    "no_lower_barrier",
    lambda p: [(1.0, p.replace(lower=0.0, rebate=REBATE)),
               (-1.0, _single_continuous(p.replace(lower=0.0, rebate=REBATE), "upper"))],
    note="L = 0: the continuous up-barrier option on the same simulated dates, rebate 3 at T, on every path",
)
_NO_UPPER_C = Identity(
    "no_upper_barrier",
    lambda p: [(1.0, p.replace(upper=math.inf, rebate=REBATE)),
               (-1.0, _single_continuous(p.replace(upper=math.inf, rebate=REBATE), "lower"))],
    note="U = inf: the continuous down-barrier option on the same simulated dates, rebate 3 at T, on every path",
)
_IN_PLUS_OUT_C = Identity(
    "in_plus_out_is_vanilla",
    lambda p: [(1.0, p.replace(rebate=0.0)), (1.0, _sibling_continuous(p, rebate=0.0)), (-1.0, _vanilla(p))],
    note="without rebates, knock-in + knock-out = vanilla on every path",
)


class _KnockOutContinuous(_DoubleContinuous):
    abstract = True
    out = True
    reductions = (
        _AWAY_OUT,
        _TODAY_OUT,
    ) + _CONTINUOUS_CLOSED_FORMS
    relations = (
        _NO_LOWER_C,
        _NO_UPPER_C,
        _IN_PLUS_OUT_C,
        _BELOW_VANILLA,
        _WIDER_WORTH_MORE,
        Bound(
            "at_most_discrete",
            "<=",
            lambda p, m: _discrete_twin(p).reference(m),
            pathwise_leg=_discrete_twin,
            source="the quadrature price of the same option watched on the simulated dates only",
        ),
    )


class _KnockInContinuous(_DoubleContinuous):
    abstract = True
    out = False
    reductions = (
        _AWAY_IN,
        _TODAY_IN,
    ) + _CONTINUOUS_CLOSED_FORMS
    relations = (
        _NO_LOWER_C,
        _NO_UPPER_C,
        _IN_PLUS_OUT_C,
        _BELOW_VANILLA,
        _WIDER_WORTH_LESS,
        Bound(
            "at_least_discrete",
            ">=",
            lambda p, m: _discrete_twin(p).reference(m),
            pathwise_leg=_discrete_twin,
            source="the quadrature price of the same option watched on the simulated dates only",
        ),
    )


class DoubleKnockOutCallContinuous(_KnockOutContinuous):
    """Pays max(S(T) - K, 0) at T if L < S < U at every instant of [0, T]; else R at T.

    Closed form: Ikeda-Kunitomo series. Limits: L -> 0 and U -> inf: the call; one barrier
    removed: the continuous single-barrier call; L at the spot: R only.
    """

    call = True


class DoubleKnockOutPutContinuous(_KnockOutContinuous):
    """Pays max(K - S(T), 0) at T if L < S < U at every instant of [0, T]; else R at T."""

    call = False


class DoubleKnockInCallContinuous(_KnockInContinuous):
    """Pays max(S(T) - K, 0) at T if S touches L or U at some instant of [0, T]; else R at T."""

    call = True


class DoubleKnockInPutContinuous(_KnockInContinuous):
    """Pays max(K - S(T), 0) at T if S touches L or U at some instant of [0, T]; else R at T."""

    call = False


FAMILY_CONTINUOUS: dict[tuple[bool, bool], type[_DoubleContinuous]] = {
    (c.out, c.call): c
    for c in (DoubleKnockOutCallContinuous, DoubleKnockOutPutContinuous,
              DoubleKnockInCallContinuous, DoubleKnockInPutContinuous)
}
