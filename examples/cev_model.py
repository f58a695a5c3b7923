"""A model of our own choosing from the literature, written as a user would: the
constant-elasticity-of-variance (CEV) model of Cox (1975), priced in closed form by
Schroder (1989).

    dS = (r - q) S dt + sigma S^beta dW,     0 <= beta <= 1,

parametrised by ``vol``, the local volatility at today's spot, sigma = vol * spot^(1 - beta),
so that the local volatility sigma S^(beta - 1) = vol (S / spot)^(beta - 1) rises as the price
falls (the leverage effect, a skew in implied volatilities) and ``beta = 1`` is Black-Scholes
with volatility ``vol``.

Audit it, and run products under it::

    limitcase audit examples/cev_model.py
    limitcase audit examples/cev_model.py:CEV:elasticity=0.3
    limitcase check payoffs/vanilla.py --model examples/cev_model.py

Simulation. No cheap exact transition with absorption at zero, so each interval between the
engine's dates is cut into ``substeps`` equal steps of the log-Euler scheme with the local
volatility frozen at the start of the step:

    ln S' = ln S + (r - q - lambda^2 / 2) h + lambda sqrt(h) Z,   lambda = vol (S / spot)^(beta - 1).

Each step is conditionally log-normal with mean S exp((r - q) h), so the discounted price is
a martingale at any step (what the martingale audit tests); the price itself has weak order 1
in the step (what the steps audit measures). The true process is absorbed at zero when
beta < 1; the scheme never reaches zero, and the local volatility is capped at
``LOCAL_VOL_CAP`` (reached only below 1e-4 of the spot for beta >= 0.5 at vol 0.2), which
changes nothing a call or put at a sensible strike can see.

Degenerate case (checked by ``limitcase audit``): ``elasticity = 1`` is Black-Scholes with
volatility ``vol``. (``vol = 0``, the deterministic forward, is one too, but every path is then
the same and a statistical comparison has nothing to test; the reductions of the products run
under the model cover it.)

References: J. C. Cox, "Notes on option pricing I: constant elasticity of variance
diffusions", working paper, Stanford University, 1975 (reprinted in Journal of Portfolio
Management 23(2), 1996); M. Schroder, "Computing the constant elasticity of variance option
pricing formula", Journal of Finance 44(1), 1989, 211-219.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
from scipy.stats import ncx2

from limitcase.errors import NoReference
from limitcase.models import BlackScholes, Degeneration, Model
from limitcase.models.base import Simulated
from limitcase.params import Param
from limitcase.references import black_scholes

LOCAL_VOL_CAP = 10.0
"""Largest local volatility the scheme uses (1000% a year)."""


def _as_black_scholes(m: "CEV") -> BlackScholes:
    return BlackScholes(spot=m.spot, rate=m.rate, dividend=m.dividend, vol=m.vol)


def cev_call(spot: float, strike: float, maturity: float, rate: float, dividend: float, vol: float,
             elasticity: float) -> float:
    r"""European call under CEV with absorption at zero (0 <= beta < 1), Schroder (1989).

    With :math:`\mu = r - q`, :math:`\sigma = vol\cdot S_0^{1-\beta}` and
    :math:`v = \sigma^2 (e^{2\mu(\beta-1)T} - 1) / (2\mu(\beta-1))` (:math:`\sigma^2 T` when
    :math:`\mu = 0`),

    .. math::

        C = S_0e^{-qT}\,[1 - F(a;\, b + 2,\, c)] - Ke^{-rT} F(c;\, b,\, a),

    :math:`a = (Ke^{-\mu T})^{2(1-\beta)}/((1-\beta)^2v)`, :math:`b = 1/(1-\beta)`,
    :math:`c = S_0^{2(1-\beta)}/((1-\beta)^2v)`, :math:`F(x; k, \lambda)` the distribution
    function of the non-central chi-square with k degrees of freedom and non-centrality
    :math:`\lambda` (scipy's ``ncx2``). ``beta = 1`` is Black-Scholes.
    """
    if elasticity >= 1.0:
        return float(black_scholes(spot, strike, maturity, rate, dividend, vol, "call"))
    if vol == 0.0:
        return max(spot * math.exp(-dividend * maturity) - strike * math.exp(-rate * maturity), 0.0)
    beta, mu = elasticity, rate - dividend
    sigma = vol * spot ** (1.0 - beta)
    x = 2.0 * mu * (beta - 1.0) * maturity
    growth = maturity if x == 0.0 else maturity * math.expm1(x) / x  # (e^x - 1) / (2 mu (beta - 1))
    v = sigma * sigma * growth
    one = 1.0 - beta
    a = (strike * math.exp(-mu * maturity)) ** (2.0 * one) / (one * one * v)
    b = 1.0 / one
    c = spot ** (2.0 * one) / (one * one * v)
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore")  # a series that does not converge shows as a price out of bounds
        price = float(spot * math.exp(-dividend * maturity) * ncx2.sf(a, b + 2.0, c)
                      - strike * math.exp(-rate * maturity) * ncx2.cdf(c, b, a))
    low = max(spot * math.exp(-dividend * maturity) - strike * math.exp(-rate * maturity), 0.0)
    if not (math.isfinite(price) and low - 1e-9 * spot <= price <= spot * math.exp(-dividend * maturity)):
        raise NoReference(f"Schroder's CEV call at elasticity={elasticity!r}, strike={strike!r}, "
                          f"maturity={maturity!r} did not evaluate to a price within the no-arbitrage bounds "
                          f"(got {price!r}); scipy's non-central chi-square does not converge there")
    return price


class CEV(Model):
    """One asset under Cox's (1975) constant elasticity of variance, by log-Euler substeps."""

    spot = Param(100.0, low=0.0, low_open=True, doc="price today")
    rate = Param(0.05, low=-1.0, high=1.0, doc="continuously compounded short rate")
    dividend = Param(0.02, low=-1.0, high=1.0, doc="continuous dividend yield")
    vol = Param(0.2, low=0.0, high=2.0, doc="local volatility at today's spot")
    elasticity = Param(0.5, low=0.0, high=1.0, doc="beta: the local variance is proportional to S^(2 beta - 2)")
    substeps = Param(8, low=1, high=4096, integer=True, doc="log-Euler steps per interval of the date grid")

    exact = False
    weak_order = 1.0
    degenerations = (
        Degeneration("elasticity_to_one", {"elasticity": 1.0}, becomes=_as_black_scholes,
                     note="beta = 1: Black-Scholes with volatility vol"),
    )

    def initial(self) -> np.ndarray:
        return np.array([self.spot])

    def dividend_yields(self) -> np.ndarray:
        return np.array([self.dividend])

    def normals_per_step(self) -> int:
        return self.substeps

    def _simulate(self, times: np.ndarray, z: np.ndarray, rng: np.random.Generator) -> Simulated:
        n, steps, m = z.shape[0], times.size, self.substeps
        dt = np.diff(times, prepend=0.0)
        mu, power = self.rate - self.dividend, self.elasticity - 1.0
        log_spot = math.log(self.spot)
        x = np.full(n, log_spot)
        s = np.empty((n, steps, 1))
        iv = np.empty((n, steps, 1))
        for j in range(steps):
            h = dt[j] / m
            acc = np.zeros(n)
            for k in range(m):
                lam = np.minimum(self.vol * np.exp(power * (x - log_spot)), LOCAL_VOL_CAP)
                x = x + (mu - 0.5 * lam * lam) * h + lam * math.sqrt(h) * z[:, j, k]
                acc += lam * lam * h
            s[:, j, 0] = x
            iv[:, j, 0] = acc
        np.exp(s, out=s)
        return Simulated(s=s, step_var=iv)

    def european_price(self, kind: str, strike: float, maturity: float) -> float:
        """Schroder's (1989) closed form for the call (:func:`cev_call`), the put by
        put-call parity; the audits and the catalogue's calls and puts read it."""
        if kind not in ("call", "put"):
            raise NoReference(f"the CEV example prices calls and puts, not {kind!r}")
        call = cev_call(self.spot, strike, maturity, self.rate, self.dividend, self.vol, self.elasticity)
        if kind == "call":
            return call
        return call - self.spot * math.exp(-self.dividend * maturity) + strike * math.exp(-self.rate * maturity)
