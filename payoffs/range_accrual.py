"""Range accrual: pays at T the cash C times the fraction of the n fixings T/n, ..., T on
which the spot lies in the corridor [L, U].

Reference. By linearity, C exp(-rT) times the average over the fixings of
P(L <= S(t_i) <= U), each a difference of two cash digitals (Reiner and Rubinstein,
"Unscrambling the Binary Code", Risk 4(9), 1991), via
:func:`limitcase.references.range_accrual`, exact. The fixing dates given to it are built
from the terms (maturity and number of fixings), not read from ``dates()``.

Checks. Limits: the corridor [0, inf] accrues on every fixing (the bond paying C); an empty
corridor (L = U) accrues on none; a price sitting exactly on L = U (spot 1, zero vol,
dividend = rate) accrues on every fixing, since the corridor includes its ends; one fixing with no
upper level is the cash digital call.
The closed form at the defaults and on a corridor with no lower level. Relations, path by
path: the accruals on [L, U] and [U, inf] add up to the accrual on [L, inf]; the accrual
grows with U; it never exceeds the bond paying C.
"""

from __future__ import annotations

import math

import numpy as np

from limitcase import Bound, Identity, Monotone, Param, ParamError, Product, Reduction, Tie
from limitcase.references import range_accrual
from limitcase.references.schedules import equal_steps

from ._common import bs_inputs, even_dates, own_closed_form
from .digitals import CashOrNothingCall
from .vanilla import ZeroCouponBond


def _bond(p: "RangeAccrual", cash: float | None = None) -> ZeroCouponBond:
    return ZeroCouponBond(cash=p.cash if cash is None else cash, maturity=p.maturity)


class RangeAccrual(Product):
    """Pays C * (number of fixings with L <= S(t_i) <= U) / n at T; fixings T/n, ..., T.

    Limits: L = 0 and U = inf: C at T. L = U: nothing (a fixing lands on the level with
    probability 0). One fixing, U = inf: the cash digital call struck at L.
    Relations: [L, U] + [U, inf] = [L, inf] path by path; increasing in U; at most C exp(-rT).
    """

    cash = Param(10.0, low=0.0, doc="cash C paid for a full accrual")
    lower = Param(90.0, low=0.0, doc="lower level L of the corridor")
    upper = Param(115.0, low=0.0, high=math.inf, doc="upper level U of the corridor (inf: none)")
    maturity = Param(1.0, low=0.0, low_open=True, doc="last fixing and payment date, in years")
    fixings = Param(12, low=1, high=10_000, integer=True, doc="number of fixings T/n, ..., T")

    reductions = (
        Reduction(
            "corridor_whole_line",
            {"lower": 0.0, "upper": math.inf},
            becomes=_bond,
            note="[0, inf] holds every fixing: C at T on every path",
        ),
        Reduction(
            "empty_corridor",
            {"lower": 110.0, "upper": 110.0},
            becomes=lambda p: _bond(p, 0.0),
            note="L = U = 110: no fixing lands exactly on the level, nothing accrues",
        ),
        Reduction(
            "fixings_on_the_levels",
            {"lower": 1.0, "upper": 1.0},
            model_changes={"spot": 1.0, "vol": 0.0, "dividend": 0.05},
            becomes=_bond,
            note="spot 1, zero vol and dividend = rate (0.05): S = exp(0) = 1 exactly on every date, on "
            "both levels; the corridor [L, U] includes its ends, so every fixing accrues: C at T",
        ),
        Reduction(
            "one_fixing_digital",
            {"fixings": 1, "upper": math.inf},
            becomes=lambda p: CashOrNothingCall(strike=p.lower, cash=p.cash, maturity=p.maturity),
            note="one fixing at T, no upper level: C if S(T) >= L, the cash digital call",
        ),
        own_closed_form(note="C exp(-rT) times the average of the corridor probabilities"),
        own_closed_form("closed_form_no_lower", {"lower": 0.0}, note="the same with L = 0"),
    )
    relations = (
        Identity(
            "corridors_add_up",
            lambda p: [
                (1.0, p),
                (1.0, p.replace(lower=p.upper, upper=math.inf)),
                (-1.0, p.replace(upper=math.inf)),
            ],
            note="a fixing in [L, inf] is in [L, U] or in [U, inf] (both only on the level itself)",
        ),
        Monotone("upper", +1, to=lambda p: p.upper + 10.0, pathwise=True),
        Bound(
            "at_most_bond",
            "<=",
            lambda p, m: _bond(p).reference(m),
            pathwise_leg=_bond,
            source="C exp(-rT) (the accrued fraction is at most 1)",
        ),
        Tie("lower", "above"), Tie("upper", "below"),
    )

    def _check(self) -> None:
        if self.upper < self.lower:
            raise ParamError(
                f"upper={self.upper!r} is below lower={self.lower!r} for {type(self).__name__}; "
                f"pass lower <= upper"
            )

    def dates(self) -> np.ndarray:
        return even_dates(self.maturity, self.fixings)

    def payoff(self, obs):
        inside = (obs.s >= self.lower) & (obs.s <= self.upper)
        return self.cash * inside.mean(axis=1)

    def reference(self, model):
        spot, rate, dividend, vol = bs_inputs(model, self)
        times = equal_steps(self.maturity, self.fixings)  # the fixings, from the terms
        return range_accrual(spot, self.lower, self.upper, times, self.maturity, rate, dividend, vol, self.cash)

    def reference_source(self) -> str:
        return "sum of cash digitals"
