"""Shared small cases for the engine tests: cheap products and checks built by hand."""

import math

import pytest
from scipy.stats import norm

from limitcase import BlackScholes
from limitcase.reduce import Check
from limitcase_payoffs.vanilla import EuropeanCall

MODEL = BlackScholes(spot=100.0, rate=0.05, dividend=0.02, vol=0.2)


def bs_call(s: float, k: float, t: float, r: float, q: float, v: float) -> float:
    """Black-Scholes-Merton call, written out here with scipy's normal (Hull, Options,
    Futures and Other Derivatives, the Black-Scholes-Merton formulas with a dividend yield);
    independent of limitcase.references."""
    d1 = (math.log(s / k) + (r - q + 0.5 * v * v) * t) / (v * math.sqrt(t))
    d2 = d1 - v * math.sqrt(t)
    return s * math.exp(-q * t) * norm.cdf(d1) - k * math.exp(-r * t) * norm.cdf(d2)


def geometric_asian_call(s: float, k: float, times, r: float, q: float, v: float) -> float:
    """Discretely fixed geometric-average call: ln G is normal with mean
    ln S + (r - q - v^2/2) mean(t) and variance v^2 sum_ij min(t_i, t_j) / n^2 (Kemna and
    Vorst, "A pricing method for options based on average asset values", Journal of Banking
    and Finance 14, 1990), paid at the last fixing; written out here with scipy's normal."""
    n = len(times)
    t_bar = sum(times) / n
    var = v * v * sum(min(a, b) for a in times for b in times) / n**2
    mean = math.log(s) + (r - q - 0.5 * v * v) * t_bar
    sd = math.sqrt(var)
    T = max(times)
    d1 = (mean - math.log(k) + var) / sd
    return math.exp(-r * T) * (math.exp(mean + 0.5 * var) * norm.cdf(d1) - k * norm.cdf(d1 - sd))


CALL_REFERENCE = bs_call(100.0, 100.0, 1.0, 0.05, 0.02, 0.2)


class CallWithTwin(EuropeanCall):
    """The call whose control variate is the call struck 1% higher (exact price by the
    closed form above): a control explaining over 99% of the variance, so it is applied
    under Sobol points too."""

    def control_variates(self, model):
        twin = EuropeanCall(strike=self.strike * 1.01, maturity=self.maturity)
        return ((twin, bs_call(model.spot, twin.strike, twin.maturity, model.rate, model.dividend, model.vol)),)


def call_check(target: float = CALL_REFERENCE, product=None, case: str = "closed_form", sense: str = "==",
               name: str = "EuropeanCall") -> Check:
    """The European call against its closed form: the cheapest real check there is. The
    check's name (hence its random streams) is ``name/case`` whatever product it prices."""
    product = product if product is not None else EuropeanCall()
    return Check(product=name, case=case, kind="reduction", legs=(product,), model=MODEL,
                 weights=(1.0,), target=target, target_source="Black-Scholes (test)", sense=sense)


@pytest.fixture
def model():
    return MODEL
