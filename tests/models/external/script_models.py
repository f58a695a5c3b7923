"""Models whose paths come from gbm_simulator.py run as an external command (one correct,
one with the dividend left out of the drift, and some that fail in the ways a simulator can)."""

import sys

from limitcase.models import BlackScholes, Degeneration
from limitcase.models.external import ExternalModel
from limitcase.params import Param
from limitcase.references import black_scholes

ARGS = (sys.executable, "{here}/gbm_simulator.py", "--seed", "{seed}", "--paths", "{paths}",
        "--times", "{times_file}", "--out", "{output}", "--spot", "{spot}", "--rate", "{rate}",
        "--dividend", "{dividend}", "--vol", "{vol}")


def _as_black_scholes(m):
    return BlackScholes(spot=m.spot, rate=m.rate, dividend=m.dividend, vol=m.vol)


class ScriptGBM(ExternalModel):
    """Geometric Brownian motion simulated by a stand-alone script."""

    command = ARGS
    timeout = 30.0
    spot = Param(100.0, low=0.0, low_open=True, doc="price today")
    rate = Param(0.05, low=-1.0, high=1.0, doc="short rate")
    dividend = Param(0.02, low=-1.0, high=1.0, doc="dividend yield")
    vol = Param(0.2, low=0.0, high=5.0, doc="volatility")
    degenerations = (
        Degeneration("no_dividend", {"dividend": 0.0}, becomes=_as_black_scholes,
                     note="dividend 0: Black-Scholes without dividend"),
    )

    def european_price(self, kind, strike, maturity):
        """Black-Scholes (1973) call: the simulator claims to be geometric Brownian motion."""
        return float(black_scholes(self.spot, strike, maturity, self.rate, self.dividend, self.vol, kind))


class ScriptGBMNoDividend(ScriptGBM):
    """Bug: the simulator's drift is r instead of r - q."""

    command = ARGS + ("--bug", "no-dividend")


class ScriptExits(ScriptGBM):
    """The simulator stops with status 3 and a message on its standard error."""

    command = ARGS + ("--bug", "exit")
