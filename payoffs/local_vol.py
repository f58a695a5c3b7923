"""Products checked under local volatility: the model desks price single-stock and index
barriers with. The checks are the barrier family's own, on a skewed surface, where the
European base case is priced from the implied surface (Dupire's construction) and the
simulation is a log-Euler scheme whose step bias is measured and declared.

The scenario's surface is invented for the checks (an equity-like skew); it is not market
data.
"""

from __future__ import annotations

import math

from limitcase import Reduction
from limitcase.errors import NoReference
from limitcase.models import BlackScholes, LocalVol
from limitcase.models.localvol import example_surface
from limitcase.references.local_vol_pde import local_vol_barrier_by_pde
from limitcase.references.schedules import equal_steps
from limitcase.volsurface import VarianceSurface

from ._common import own_closed_form
from .barriers import _AWAY_OUT, _DiscreteOut, DownAndOutCall

__all__ = ["LocalVolDownAndOutCall", "skewed_surface"]

SPOT, RATE, DIVIDEND = 100.0, 0.03, 0.01


def skewed_surface() -> VarianceSurface:
    """The invented equity skew of :func:`limitcase.models.localvol.example_surface`, free of
    static arbitrage (checked when built)."""
    return example_surface(SPOT, RATE, DIVIDEND)


STEP_BIAS = 0.05
CLOSED_FORM_SUBSTEPS = 16
"""Log-Euler steps per monitoring interval of the comparison with the finite-difference
price: the knock-out's step bias is far larger than the vanilla's near the barrier."""

CLOSED_FORM_REASON = (
    "log-Euler step bias of the knock-out at 16 steps per monitoring interval, against the "
    "finite-difference price: measured (500k paths) +0.008 +/- 0.020 at the defaults, "
    "+0.006 +/- 0.024 at K 83.7, H 86.4, 58 dates, and -0.012 +/- 0.034 at K 80, H 95, 26 "
    "dates over 1.5 years; at one step per date the bias was -0.024 (defaults), -0.12 and "
    "-0.18 at those points, at 4 steps -0.005, -0.026 and -0.18, hence the 16 steps"
)

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
    bias declared). H at the spot: knocked today, R only. At its own parameters: against a
    Crank-Nicolson solution of the local-volatility pricing equation over the monitoring
    dates (the log-Euler step bias declared). Relations: knock-in + knock-out = vanilla on
    every path; worth more as the barrier moves away; at most the vanilla. (The
    continuous-barrier bound of the Black-Scholes family has no counterpart under local
    volatility and is left out.)
    """

    reductions = (
        Reduction(
            _AWAY_OUT.name, _AWAY_OUT.changes, becomes=_AWAY_OUT.becomes,
            allowance=STEP_BIAS, reason=STEP_BIAS_REASON, note=_AWAY_OUT.note,
        ),
        *(r for r in _DiscreteOut.reductions if r.name not in (_AWAY_OUT.name, "closed_form")),
        own_closed_form(
            "closed_form", model_changes={"substeps": CLOSED_FORM_SUBSTEPS}, allowance=STEP_BIAS,
            reason=CLOSED_FORM_REASON,
            note="Monte Carlo on the monitoring dates against a finite-difference solution of the "
                 "local-volatility pricing equation over the same dates (rebuilt from the terms)",
        ),
    )
    relations = tuple(r for r in _DiscreteOut.relations if getattr(r, "name", "") != "at_least_continuous")

    def reference(self, model):
        """Under local volatility (no discrete dividends): Crank-Nicolson on the pricing
        equation in log-moneyness, reset at each monitoring date (rebuilt from the terms:
        ``monitoring`` equal steps to T), with the model's own Dupire local variance; under
        Black-Scholes the family's recursive quadrature. A spot at or below the barrier is
        knocked today (the product's rule)."""
        if isinstance(model, BlackScholes):
            return super().reference(model)
        if not isinstance(model, LocalVol) or model.dividends:
            raise NoReference(f"{type(self).__name__} has a reference under Black-Scholes and under local "
                              f"volatility without discrete dividends, not {type(model).__name__}")
        if model.spot <= self.barrier:
            paid_now = bool(self.rebate_at_hit)
            return self.rebate * (1.0 if paid_now else math.exp(-model.rate * self.maturity))
        return local_vol_barrier_by_pde(
            "down-and-out-call", model.spot, self.strike, self.barrier,
            equal_steps(self.maturity, self.monitoring), self.maturity, model.rate, model.dividend,
            model.surface.local_variance, rebate=self.rebate, rebate_at_hit=bool(self.rebate_at_hit),
        )

    def reference_source(self) -> str:
        return "finite differences on the local-volatility pricing equation (Crank-Nicolson, Rannacher start)"

    def scenario(self) -> LocalVol:
        return LocalVol(surface=skewed_surface(), spot=SPOT, rate=RATE, dividend=DIVIDEND, substeps=1)
