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
"""

from __future__ import annotations

import math
from typing import ClassVar

import numpy as np

from limitcase import Bound, Identity, Monotone, Param, ParamError, Product, Reduction
from limitcase.references import black_scholes, discrete_double_barrier_by_quadrature
from limitcase.references.schedules import equal_steps

from ._common import bs_inputs, even_dates, own_closed_form
from .barriers import DownAndInCall, DownAndInPut, DownAndOutCall, DownAndOutPut
from .barriers import UpAndInCall, UpAndInPut, UpAndOutCall, UpAndOutPut
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


class _KnockOut(_DoubleBarrier):
    abstract = True
    out = True
    reductions = (
        Reduction(
            "corridor_out_of_reach",
            {"lower": 0.0, "upper": math.inf, "rebate": REBATE},
            becomes=_vanilla,
            note="L = 0 and U = inf are never touched: the vanilla, the rebate never paid",
        ),
        Reduction(
            "touched_today",
            {"lower": SPOT, "rebate": REBATE},
            model_changes={"spot": SPOT},
            becomes=lambda p: ZeroCouponBond(cash=REBATE, maturity=p.maturity),
            note="L at the spot is touched today: knocked out at once, the rebate at T",
        ),
    ) + _CLOSED_FORMS
    relations = (
        _NO_LOWER,
        _NO_UPPER,
        _IN_PLUS_OUT,
        _BELOW_VANILLA,
        Monotone("upper", +1, to=_wider, pathwise=True, name="worth_more_as_corridor_widens"),
    )


class _KnockIn(_DoubleBarrier):
    abstract = True
    out = False
    reductions = (
        Reduction(
            "corridor_out_of_reach",
            {"lower": 0.0, "upper": math.inf, "rebate": REBATE},
            becomes=lambda p: ZeroCouponBond(cash=REBATE, maturity=p.maturity),
            note="L = 0 and U = inf are never touched: never knocked in, the rebate at T",
        ),
        Reduction(
            "touched_today",
            {"lower": SPOT, "rebate": REBATE},
            model_changes={"spot": SPOT},
            becomes=_vanilla,
            note="L at the spot is touched today: knocked in at once, the vanilla",
        ),
    ) + _CLOSED_FORMS
    relations = (
        _NO_LOWER,
        _NO_UPPER,
        _IN_PLUS_OUT,
        _BELOW_VANILLA,
        Monotone("upper", -1, to=_wider, pathwise=True, name="worth_less_as_corridor_widens"),
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
