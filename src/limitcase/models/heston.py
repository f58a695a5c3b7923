"""Heston (1993) stochastic volatility, by the QE scheme of Andersen (2008) or full-truncation Euler.

dS/S = (r - q) dt + sqrt(v) dW_S,   dv = kappa (theta - v) dt + sigma sqrt(v) dW_v,
d<W_S, W_v> = rho dt.

No exact transition is cheap, so the model discretises: every interval of the engine's date
grid is cut into ``substeps`` equal substeps, and each substep is one step of the selected
scheme. Halving the step (doubling ``substeps``) is how the time-step audit sees the
scheme's convergence.

Normals. ``normals_per_step() = 2 * substeps``. On each grid interval the block
``z[:, j, :]`` is read substep by substep: ``z[:, j, 2k]`` drives the variance of substep
``k`` and ``z[:, j, 2k + 1]`` is the part of the log-price's Brownian increment independent
of the variance. The QE scheme needs a uniform in its exponential branch; it takes
``U = Phi(z[:, j, 2k])`` so every random number comes from ``z`` (common random numbers and
any sampler the engine uses carry over). ``rng`` is not used.
"""

from __future__ import annotations

import math
from typing import Any, ClassVar

import numpy as np
from scipy.special import ndtr

from ..errors import ParamError
from ..params import Param
from .base import Degeneration, Model, Simulated
from .gbm import BlackScholes

__all__ = ["Heston", "HESTON_SCHEMES"]

HESTON_SCHEMES = ("qe", "euler")
"""``"qe"``: quadratic-exponential with martingale correction (Andersen 2008);
``"euler"``: log-Euler for the price, full-truncation Euler for the variance
(Lord, Koekkoek and van Dijk 2010)."""

PSI_CRITICAL = 1.5
"""Switching level of the QE scheme between its quadratic and exponential branches;
Andersen (2008), section 3.2.3, recommends 1.5 (any value in [1, 2] is admissible)."""


def _to_black_scholes(m: "Heston") -> BlackScholes:
    return BlackScholes(spot=m.spot, rate=m.rate, dividend=m.dividend, vol=math.sqrt(m.theta))


class Heston(Model):
    r"""One asset under Heston (1993) stochastic volatility.

    Parameters
    ----------
    scheme : {"qe", "euler"}
        Discretisation (keyword; see :data:`HESTON_SCHEMES`). Default ``"qe"``.
    spot, rate, dividend
        Price today, short rate, continuous dividend yield.
    v0, kappa, theta, vol_of_vol, rho
        Initial variance, speed of mean reversion, long-run variance, volatility of
        variance :math:`\sigma`, correlation of the two Brownian motions.
    substeps
        Scheme steps per interval of the date grid (the step is the interval over
        ``substeps``).

    Notes
    -----
    **QE** (Andersen 2008, sections 3.2.3 and 4.2). Over a step :math:`\Delta`, with
    :math:`E = e^{-\kappa\Delta}`, the variance's conditional mean and variance are

    .. math::

        m = \theta + (\hat V - \theta)E,\quad
        s^2 = \frac{\hat V\sigma^2E(1-E)}{\kappa} + \frac{\theta\sigma^2(1-E)^2}{2\kappa},
        \quad \psi = s^2/m^2 .

    For :math:`\psi \le 1.5`: :math:`V' = a(b + Z_V)^2` with
    :math:`b^2 = 2/\psi - 1 + \sqrt{2/\psi}\sqrt{2/\psi - 1}`, :math:`a = m/(1+b^2)`.
    For :math:`\psi > 1.5`: :math:`V' = \Psi^{-1}(U) = 0` if :math:`U \le p`, else
    :math:`\beta^{-1}\ln((1-p)/(1-U))`, :math:`p = (\psi-1)/(\psi+1)`,
    :math:`\beta = (1-p)/m`, :math:`U = \Phi(Z_V)` (so :math:`1 - U = \Phi(-Z_V)`, computed
    without cancellation). The log-price (central discretisation
    :math:`\gamma_1 = \gamma_2 = 1/2`):

    .. math::

        \ln X' = \ln X + (r-q)\Delta + K_0^* + K_1\hat V + K_2V'
                 + \sqrt{K_3\hat V + K_4V'}\,Z,

    :math:`K_1 = \gamma_1\Delta(\kappa\rho/\sigma - 1/2) - \rho/\sigma`,
    :math:`K_2 = \gamma_2\Delta(\kappa\rho/\sigma - 1/2) + \rho/\sigma`,
    :math:`K_3 = \gamma_1\Delta(1-\rho^2)`, :math:`K_4 = \gamma_2\Delta(1-\rho^2)`, and the
    martingale correction :math:`K_0^*` chosen so that
    :math:`E[X'e^{-(r-q)\Delta} \mid X, \hat V] = X` exactly (Andersen's section 4.2.1),
    with :math:`A = K_2 + K_4/2`:
    :math:`K_0^* = -\frac{Ab^2a}{1-2Aa} + \frac12\ln(1-2Aa) - (K_1 + \frac12K_3)\hat V`
    (quadratic branch) and
    :math:`K_0^* = -\ln\big(p + \frac{\beta(1-p)}{\beta-A}\big) - (K_1 + \frac12K_3)\hat V`
    (exponential). The correction exists when :math:`2Aa < 1`, resp. :math:`A < \beta`; that
    always holds for :math:`\rho \le 0` (then :math:`A \le 0`). Where it fails (positive
    :math:`\rho`, small :math:`\sigma`, long steps) the uncorrected
    :math:`K_0 = -\rho\kappa\theta\Delta/\sigma` is used on those paths, as Andersen
    suggests; the martingale audit shows whatever drift that leaves. With
    :math:`\sigma = 0` the variance is deterministic, :math:`V' = m`, and the log-price
    step is the exact Gaussian one with variance :math:`(\hat V + V')\Delta/2` (the limit
    of the formula above).

    **Euler** (full truncation, Lord, Koekkoek and van Dijk 2010): with
    :math:`V^+ = \max(V, 0)`,
    :math:`V' = V + \kappa(\theta - V^+)\Delta + \sigma\sqrt{V^+\Delta}Z_V` and
    :math:`\ln X' = \ln X + (r - q - V^+/2)\Delta + \sqrt{V^+\Delta}(\rho Z_V +
    \sqrt{1-\rho^2}Z)`; the log-Euler step keeps the discounted price a martingale.

    ``step_var`` is the integrated variance over each grid interval by the trapezoid rule
    over the substeps, :math:`\sum (V_k^+ + V_{k+1}^+)\Delta/2`.

    ``exact = False`` and ``weak_order = 1`` tell the time-step audit
    (:func:`limitcase.audits.audit_steps`) to step the scheme through ``substeps`` and to
    extrapolate with order 1. The default ``substeps = 4`` makes a quarterly grid a
    1/16-year step. Measured QE bias of the one-year at-the-money call (8.6284) at the
    default parameters: -0.013 +/- 0.007 with one step a year (2M paths), -0.017, -0.004,
    +0.001 at dt = 1/4, 1/8, 1/16 (1M paths, +/- 0.01, common random numbers).

    References
    ----------
    .. [1] S. L. Heston, "A closed-form solution for options with stochastic volatility
       with applications to bond and currency options", Review of Financial Studies 6(2),
       1993.
    .. [2] L. Andersen, "Simple and efficient simulation of the Heston stochastic
       volatility model", Journal of Computational Finance 11(3), 2008.
    .. [3] R. Lord, R. Koekkoek and D. van Dijk, "A comparison of biased simulation schemes
       for stochastic volatility models", Quantitative Finance 10(2), 2010.
    """

    spot = Param(100.0, low=0.0, low_open=True, doc="price today")
    rate = Param(0.05, low=-1.0, high=1.0, doc="continuously compounded short rate")
    dividend = Param(0.02, low=-1.0, high=1.0, doc="continuous dividend yield")
    v0 = Param(0.04, low=0.0, high=4.0, doc="variance today (volatility squared)")
    kappa = Param(1.5, low=0.0, high=50.0, low_open=True, doc="speed of mean reversion of the variance")
    theta = Param(0.04, low=0.0, high=4.0, low_open=True, doc="long-run variance")
    vol_of_vol = Param(0.5, low=0.0, high=5.0, doc="volatility of the variance")
    rho = Param(-0.7, low=-1.0, high=1.0, doc="correlation of price and variance shocks")
    substeps = Param(4, low=1, high=4096, integer=True, doc="scheme steps per interval of the date grid")

    exact: ClassVar[bool] = False
    weak_order: ClassVar[float] = 1.0
    degenerations = (
        Degeneration(
            "vol_of_vol_to_zero",
            {"vol_of_vol": 0.0, "v0": lambda m: m.theta},
            becomes=_to_black_scholes,
            note="vol_of_vol = 0 with v0 = theta: the variance stays at theta, Black-Scholes with vol sqrt(theta)",
        ),
    )

    def __init__(self, scheme: str = "qe", **overrides: Any) -> None:
        if scheme not in HESTON_SCHEMES:
            raise ParamError(
                f"scheme={scheme!r} is not a Heston scheme; choose one of {', '.join(map(repr, HESTON_SCHEMES))}"
            )
        object.__setattr__(self, "scheme", scheme)
        super().__init__(**overrides)

    def replace(self, **changes: Any) -> "Heston":
        scheme = changes.pop("scheme", self.scheme)
        values = self.params()
        values.update(changes)
        return type(self)(scheme=scheme, **values)

    def __eq__(self, other: object) -> bool:
        return super().__eq__(other) and self.scheme == other.scheme  # type: ignore[attr-defined]

    def __hash__(self) -> int:
        return hash((super().__hash__(), self.scheme))

    def __repr__(self) -> str:
        return super().__repr__()[:-1] + f", scheme={self.scheme!r})"

    def normals_per_step(self) -> int:
        return 2 * self.substeps

    def initial(self) -> np.ndarray:
        return np.array([self.spot])

    def dividend_yields(self) -> np.ndarray:
        return np.array([self.dividend])

    def characteristic_function(self, u: Any, t: float) -> np.ndarray:
        r""":math:`\mathbb E[e^{iu\ln S_t}]` in the "little trap" form of Albrecher, Mayer,
        Schoutens and Tistaert (2007), which stays on the principal branch of the logarithm.

        With :math:`b = \kappa - \rho\sigma iu`, :math:`\beta = u^2 + iu`,
        :math:`d = \sqrt{b^2 + \sigma^2\beta}` (:math:`\operatorname{Re} d \ge 0`),
        :math:`g = (b - d)/(b + d)`:

        .. math::

            \ln\varphi(u) = iu(\ln S_0 + (r - q)t)
              + \frac{\kappa\theta}{\sigma^2}\Big[(b - d)t
              - 2\ln\frac{1 - ge^{-dt}}{1 - g}\Big]
              + \frac{v_0}{\sigma^2}(b - d)\frac{1 - e^{-dt}}{1 - ge^{-dt}} .

        The divisions by :math:`\sigma^2` are done analytically,
        :math:`(b - d)/\sigma^2 = -\beta/(b + d)`, so ``vol_of_vol = 0`` gives the
        deterministic-variance limit exactly. Heston (1993); Albrecher et al., "The little
        Heston trap", Wilmott Magazine, January 2007.
        """
        u = np.asarray(u, dtype=complex)
        kappa, theta, sigma, rho = self.kappa, self.theta, self.vol_of_vol, self.rho
        beta = u * u + 1j * u
        b = kappa - rho * sigma * 1j * u
        d = np.sqrt(b * b + sigma * sigma * beta)
        plus, minus = b + d, b - d
        with np.errstate(all="ignore"):
            # h = (b - d) / sigma^2 from whichever of b + d, b - d is the larger
            h = np.where(np.abs(plus) >= np.abs(minus), -beta / plus, minus / (sigma * sigma if sigma else 1.0))
            g = minus / plus
            e = -np.expm1(-d * t)  # 1 - e^{-dt}
            y = h * e / (plus * (1.0 - g))  # z / sigma^2
            z = sigma * sigma * y  # (1 - g e^{-dt}) / (1 - g) - 1
            small = np.abs(z) < 1e-4
            zs = np.where(small, z, 0.0)
            log1p_over_z = np.where(
                small, 1.0 - zs * (0.5 - zs * (1.0 / 3.0 - zs * 0.25)),
                np.log(1.0 + z) / np.where(small, 1.0, z),
            )
            c = kappa * theta * (h * t - 2.0 * log1p_over_z * y)
            dv = h * e / (1.0 - g * (1.0 - e))
        # at beta = 0 (u = 0 or u = -i) the exponent is 0 exactly (the forward is the martingale's)
        expo = np.where(beta == 0.0, 0.0, c + self.v0 * dv)
        return np.exp(1j * u * (math.log(self.spot) + (self.rate - self.dividend) * t) + expo)

    # ------------------------------------------------------------------------------------
    def _simulate(self, times: np.ndarray, z: np.ndarray, rng: np.random.Generator) -> Simulated:
        n, steps = z.shape[0], times.size
        m = self.substeps
        dt = np.diff(times, prepend=0.0)
        x = np.full(n, math.log(self.spot))
        v = np.full(n, float(self.v0))
        s = np.empty((n, steps, 1))
        iv = np.empty((n, steps, 1))
        step = self._qe_step if self.scheme == "qe" else self._euler_step
        for j in range(steps):
            h = dt[j] / m
            acc = np.zeros(n)
            for k in range(m):
                x, v_new = step(x, v, h, z[:, j, 2 * k], z[:, j, 2 * k + 1])
                acc += (np.maximum(v, 0.0) + np.maximum(v_new, 0.0)) * (0.5 * h)
                v = v_new
            s[:, j, 0] = x
            iv[:, j, 0] = acc
        np.exp(s, out=s)
        return Simulated(s=s, step_var=iv)

    def _qe_step(self, x: np.ndarray, v: np.ndarray, h: float, zv: np.ndarray, zs: np.ndarray
                 ) -> tuple[np.ndarray, np.ndarray]:
        kappa, theta, sigma, rho = self.kappa, self.theta, self.vol_of_vol, self.rho
        drift = (self.rate - self.dividend) * h
        e = math.exp(-kappa * h)
        one_minus_e = -math.expm1(-kappa * h)
        mean = theta + (v - theta) * e
        if sigma == 0.0:
            v_new = mean
            var = 0.5 * (v + v_new) * h
            x_new = x + drift - 0.5 * var + np.sqrt(var) * (rho * zv + math.sqrt(1.0 - rho * rho) * zs)
            return x_new, v_new
        s2 = v * (sigma * sigma * e * one_minus_e / kappa) + theta * sigma * sigma * one_minus_e**2 / (2.0 * kappa)
        psi = s2 / (mean * mean)
        g1 = g2 = 0.5
        k1 = g1 * h * (kappa * rho / sigma - 0.5) - rho / sigma
        k2 = g2 * h * (kappa * rho / sigma - 0.5) + rho / sigma
        k3 = g1 * h * (1.0 - rho * rho)
        k4 = g2 * h * (1.0 - rho * rho)
        a_coef = k2 + 0.5 * k4
        k0_plain = -rho * kappa * theta * h / sigma

        quad = psi <= PSI_CRITICAL
        v_new = np.empty_like(v)
        k0 = np.empty_like(v)

        # quadratic branch: V' = a (b + Z)^2, a non-central chi-square with one degree
        iq = np.flatnonzero(quad)
        if iq.size:
            inv = 2.0 / psi[iq]
            b2 = inv - 1.0 + np.sqrt(inv) * np.sqrt(inv - 1.0)
            a = mean[iq] / (1.0 + b2)
            v_new[iq] = a * (np.sqrt(b2) + zv[iq]) ** 2
            denom = 1.0 - 2.0 * a_coef * a
            ok = denom > 0.0
            with np.errstate(divide="ignore", invalid="ignore"):
                corr = -a_coef * b2 * a / denom + 0.5 * np.log(denom)
            k0[iq] = np.where(ok, corr - (k1 + 0.5 * k3) * v[iq], k0_plain)
        # exponential branch: mass p at zero, exponential tail of rate beta
        ie = np.flatnonzero(~quad)
        if ie.size:
            ps = psi[ie]
            p = (ps - 1.0) / (ps + 1.0)
            beta = (1.0 - p) / mean[ie]
            tail = ndtr(-zv[ie])  # 1 - U with U = Phi(Z_V), without cancellation
            with np.errstate(divide="ignore"):
                v_new[ie] = np.where(tail >= 1.0 - p, 0.0, np.log((1.0 - p) / tail) / beta)
            ok = a_coef < beta
            with np.errstate(divide="ignore", invalid="ignore"):
                corr = -np.log(p + beta * (1.0 - p) / (beta - a_coef))
            k0[ie] = np.where(ok, corr - (k1 + 0.5 * k3) * v[ie], k0_plain)

        var = np.maximum(k3 * v + k4 * v_new, 0.0)
        x_new = x + drift + k0 + k1 * v + k2 * v_new + np.sqrt(var) * zs
        return x_new, v_new

    def _euler_step(self, x: np.ndarray, v: np.ndarray, h: float, zv: np.ndarray, zs: np.ndarray
                    ) -> tuple[np.ndarray, np.ndarray]:
        rho = self.rho
        vp = np.maximum(v, 0.0)
        root = np.sqrt(vp * h)
        x_new = x + (self.rate - self.dividend - 0.5 * vp) * h + root * (rho * zv + math.sqrt(1.0 - rho * rho) * zs)
        v_new = v + self.kappa * (self.theta - vp) * h + self.vol_of_vol * root * zv
        return x_new, v_new
