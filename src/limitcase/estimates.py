"""What the engine returns: an :class:`Estimate` (value, standard error, paths) and the
:class:`Joint` statistics of several legs priced on common paths, from which an estimate
of any weighted combination is taken, with control variates applied where the run has them.

Control variates (Glasserman 2004, *Monte Carlo Methods in Financial Engineering*,
Section 4.1): ``Y_cv = mean(Y) - beta . (mean(C) - mu)`` with ``beta = Cov(C)^+ Cov(C, Y)``
estimated on pilot paths of their own, so ``E[Y_cv] = E[Y]`` exactly (see
:mod:`limitcase.engine`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Sequence

import numpy as np

from .checks import PathRuleResult
from .errors import ParamError

__all__ = ["Estimate", "Joint"]


@dataclass(frozen=True, slots=True)
class Estimate:
    """A Monte Carlo estimate: value, standard error, the number of paths behind it, and the
    degrees of freedom of the standard error (``inf`` when it is a large-sample one)."""

    value: float
    stderr: float
    paths: int
    dof: float = math.inf

    def interval(self, z: float = 1.96) -> tuple[float, float]:
        """Symmetric confidence interval ``value +/- z * stderr``."""
        return (self.value - z * self.stderr, self.value + z * self.stderr)

    def __str__(self) -> str:
        return f"{self.value:.6g} +/- {self.stderr:.2g} ({self.paths} paths)"


@dataclass
class Joint:
    """Joint statistics of the legs' discounted cash flows over common paths.

    ``mean`` are the legs' plain sample means (unbiased under every method). ``cov`` is
    scaled so that ``cov / paths`` is the covariance of ``mean`` as an estimator: the sample
    covariance of the per-path values for independent paths, the same computed over pair
    means or scramble means for antithetic and Sobol sampling. ``dof`` are the degrees of
    freedom of that covariance. With control variates, :meth:`estimate` applies them.
    """

    paths: int
    mean: np.ndarray
    cov: np.ndarray
    rules: list[PathRuleResult] = field(default_factory=list)
    method: str = "plain"
    dof: float = math.inf
    controls: tuple[str, ...] = ()
    control_mean: np.ndarray | None = None
    control_exact: np.ndarray | None = None
    full_cov: np.ndarray | None = None  # legs + controls, scaled like ``cov``
    pilot_cov: np.ndarray | None = None  # legs + controls, per path, on the pilot
    notes: tuple[str, ...] = ()
    control_min_r2: float = 0.0

    def beta(self, weights: Sequence[float]) -> np.ndarray:
        """Control-variate coefficients of ``sum(w_i * price_i)``, from the pilot paths:
        ``beta = Cov(C)^+ Cov(C, Y)`` (pseudo-inverse: duplicate controls are harmless)."""
        if self.pilot_cov is None:
            return np.zeros(0)
        w = np.asarray(weights, dtype=float)
        k = len(self.mean)
        pcc = self.pilot_cov[k:, k:]
        pcy = self.pilot_cov[k:, :k] @ w
        return np.linalg.pinv(pcc, rcond=1e-10, hermitian=True) @ pcy

    def pilot_r2(self, weights: Sequence[float]) -> float:
        """The share of the pilot variance of ``sum(w_i * V_i)`` the controls explain."""
        if self.pilot_cov is None:
            return 0.0
        w = np.asarray(weights, dtype=float)
        k = len(self.mean)
        var_y = float(w @ self.pilot_cov[:k, :k] @ w)
        if not var_y > 0.0:
            return 0.0
        explained = float((self.pilot_cov[k:, :k] @ w) @ self.beta(w))
        return min(max(explained / var_y, 0.0), 1.0)

    def uses_controls(self, weights: Sequence[float]) -> bool:
        """Whether :meth:`estimate` applies the controls to this statistic: always when the
        paths are pseudo-random; with Sobol points only when the controls explain at least
        ``control_min_r2`` of its variance on the pilot (a decision on independent paths,
        which keeps the estimate unbiased)."""
        if self.control_mean is None or self.full_cov is None or not len(self.controls):
            return False
        return self.control_min_r2 <= 0.0 or self.pilot_r2(weights) >= self.control_min_r2

    def method_for(self, weights: Sequence[float]) -> str:
        """The method behind :meth:`estimate` of this statistic (``control+...`` only when
        the controls are applied to it)."""
        if self.controls and not self.uses_controls(weights):
            base = self.method.removeprefix("control+")
            return "plain" if base == "control" else base
        return self.method

    def estimate(self, weights: Sequence[float], *, controls: bool = True) -> Estimate:
        """The estimate of ``sum(w_i * price_i)`` with its standard error (covariances
        included: common random numbers make differences precise), control variates applied
        when the run has them, ``controls`` is true and :meth:`uses_controls` says so."""
        w = np.asarray(weights, dtype=float)
        if w.shape != self.mean.shape:
            raise ParamError(f"weights of length {w.size} for {self.mean.size} legs; give one weight per leg")
        if controls and self.uses_controls(w):
            b = self.beta(w)
            assert self.control_exact is not None and self.control_mean is not None and self.full_cov is not None
            value = float(w @ self.mean - b @ (self.control_mean - self.control_exact))
            v = np.concatenate([w, -b])
            var = float(v @ self.full_cov @ v)
        else:
            value = float(w @ self.mean)
            var = float(w @ self.cov @ w)
        se = math.sqrt(max(var, 0.0) / self.paths) if self.paths > 1 and math.isfinite(var) else math.inf
        return Estimate(value, se, self.paths, self.dof)
