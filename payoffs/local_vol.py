"""Products checked under local volatility: the model desks price single-stock and index
barriers with. The checks are the barrier family's own, on a skewed surface, where the
European base case is priced from the implied surface (Dupire's construction) and the
simulation is a log-Euler scheme whose step bias is measured and declared.

The scenario's surface is invented for the checks (an equity-like skew); it is not market
data.
"""

from __future__ import annotations

from limitcase import Reduction
from limitcase.models import LocalVol
from limitcase.models.localvol import example_surface
from limitcase.volsurface import VarianceSurface

from .barriers import _AWAY_OUT, _DiscreteOut, DownAndOutCall

__all__ = ["LocalVolDownAndOutCall", "skewed_surface"]

SPOT, RATE, DIVIDEND = 100.0, 0.03, 0.01


def skewed_surface() -> VarianceSurface:
    """The invented equity skew of :func:`limitcase.models.localvol.example_surface`, free of
    static arbitrage (checked when built)."""
    return example_surface(SPOT, RATE, DIVIDEND)


STEP_BIAS = 0.05
STEP_BIAS_REASON = (
    "log-Euler step bias of local volatility at one step per weekly date (52 a year): the "
    "1-year call struck at 90 on this surface measured -0.017 +/- 0.011 (4M paths, 48 steps), "
    "and the bias halves with the step (-1.13, -0.50, -0.21, -0.09 at 2, 4, 8, 16 steps); "
    "declared at about the measured bias plus 3 of its standard errors"
)


class LocalVolDownAndOutCall(DownAndOutCall):
    """Pays max(S(T) - K, 0) at T unless S <= H today or on a weekly monitoring date; then
    the rebate R. Checked under local volatility on a skewed surface.

    Limits: H -> 0: the European call, priced from the implied surface (its log-Euler step
    bias declared). H at the spot: knocked today, R only. Relations: knock-in + knock-out =
    vanilla on every path; worth more as the barrier moves away; at most the vanilla.
    (The continuous-barrier bound and the quadrature closed form of the Black-Scholes family
    have no counterpart under local volatility and are left out.)
    """

    reductions = (
        Reduction(
            _AWAY_OUT.name, _AWAY_OUT.changes, becomes=_AWAY_OUT.becomes,
            allowance=STEP_BIAS, reason=STEP_BIAS_REASON, note=_AWAY_OUT.note,
        ),
        *(r for r in _DiscreteOut.reductions if r.name not in (_AWAY_OUT.name, "closed_form")),
    )
    relations = tuple(r for r in _DiscreteOut.relations if getattr(r, "name", "") != "at_least_continuous")

    def scenario(self) -> LocalVol:
        return LocalVol(surface=skewed_surface(), spot=SPOT, rate=RATE, dividend=DIVIDEND, substeps=1)
