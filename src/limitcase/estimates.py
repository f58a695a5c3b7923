"""What the engine returns: an :class:`Estimate` (value, standard error, paths) and the
:class:`Joint` statistics of several legs priced on common paths, from which an estimate
of any weighted combination is taken, with control variates applied where the run has them.

Control variates (Glasserman 2004, *Monte Carlo Methods in Financial Engineering*,
Section 4.1): ``Y_cv = mean(Y) - beta . (mean(C) - mu)`` with ``beta = Cov(C)^+ Cov(C, Y)``
estimated on pilot paths of their own, so ``E[Y_cv] = E[Y]`` exactly (see
:mod:`limitcase.engine`).

No tautological control. A control is there to remove noise, not to supply the answer. When
the statistic is, on the pilot paths, an exact linear function of some controls (pilot
``R^2`` above :data:`TAUTOLOGY_R2`), the estimate would return nothing but those controls'
assumed prices: a prepaid forward against the discounted underlying returns the model's
forward to the last digit whatever the simulation does. Such controls are dropped for that
statistic (:meth:`Joint.dropped_controls` names them, and the check's outcome says so); the
rest still apply. The decision reads the pilot only, so the estimate stays unbiased.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Sequence

import numpy as np

from .checks import PathRuleResult
from .errors import ParamError

__all__ = ["Estimate", "Joint", "TAUTOLOGY_R2"]

TAUTOLOGY_R2 = 1.0 - 1e-9
"""A statistic whose pilot variance controls explain beyond this share is an exact linear
function of them (up to rounding): those controls are not applied to it. An exact relation
leaves 1 - R^2 at the rounding level of the pilot covariance (about 1e-15 measured for a
prepaid forward against the discounted underlying, 2 x 4096 pilot paths); the closest
honest control of the catalogue, the geometric-Asian control of an arithmetic Asian with 52
fixings, leaves 1 - R^2 of about 1e-3 (measured, seed 1): nine orders of magnitude apart."""


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
    paying: tuple[int, ...] = ()  # per leg, the paths on which it pays something (empty: not counted)

    control_max_r2: float = TAUTOLOGY_R2

    def _r2(self, w: np.ndarray, idx: Sequence[int]) -> float:
        """Pilot R^2 of ``w . V`` on the controls ``idx`` (0 without pilot or controls)."""
        if self.pilot_cov is None or not len(idx):
            return 0.0
        k = len(self.mean)
        var_y = float(w @ self.pilot_cov[:k, :k] @ w)
        if not var_y > 0.0:
            return 0.0
        cols = [k + j for j in idx]
        pcy = self.pilot_cov[cols, :k] @ w
        b = np.linalg.pinv(self.pilot_cov[np.ix_(cols, cols)], rcond=1e-10, hermitian=True) @ pcy
        return min(max(float(pcy @ b) / var_y, 0.0), 1.0)

    def _kept(self, w: np.ndarray) -> tuple[list[int], list[tuple[int, float]]]:
        """Controls applied to ``w . V`` and the ones dropped as tautological, with the R^2
        the dropped ones had together. While the kept controls explain more than
        ``control_max_r2`` of the pilot variance, every control without which they would
        not is dropped (all of a replicating set, e.g. both assets of a prepaid basket);
        if none is singly necessary (duplicates), the one explaining most alone goes."""
        kept = list(range(len(self.controls)))
        dropped: list[tuple[int, float]] = []
        if self.pilot_cov is None or self.control_max_r2 >= 1.0:
            return kept, dropped
        while kept:
            r2 = self._r2(w, kept)
            if r2 <= self.control_max_r2:
                break
            needed = [j for j in kept if self._r2(w, [i for i in kept if i != j]) <= self.control_max_r2]
            if not needed:
                needed = [max(kept, key=lambda j: self._r2(w, [j]))]
            dropped.extend((j, r2) for j in needed)
            kept = [j for j in kept if j not in needed]
        return kept, dropped

    def dropped_controls(self, weights: Sequence[float]) -> list[tuple[str, float]]:
        """The controls not applied to ``sum(w_i * V_i)`` because it is an exact linear
        function of them on the pilot, with the pilot R^2 they had (see the module notes)."""
        w = np.asarray(weights, dtype=float)
        return [(self.controls[j], r2) for j, r2 in self._kept(w)[1]]

    def beta(self, weights: Sequence[float]) -> np.ndarray:
        """Control-variate coefficients of ``sum(w_i * price_i)``, from the pilot paths:
        ``beta = Cov(C)^+ Cov(C, Y)`` (pseudo-inverse: duplicate controls are harmless) over
        the controls kept for it; 0 for a control dropped as tautological."""
        if self.pilot_cov is None:
            return np.zeros(0)
        w = np.asarray(weights, dtype=float)
        k = len(self.mean)
        kept = self._kept(w)[0]
        out = np.zeros(len(self.pilot_cov) - k)
        if kept:
            cols = [k + j for j in kept]
            pcc = self.pilot_cov[np.ix_(cols, cols)]
            pcy = self.pilot_cov[cols, :k] @ w
            out[kept] = np.linalg.pinv(pcc, rcond=1e-10, hermitian=True) @ pcy
        return out

    def pilot_r2(self, weights: Sequence[float]) -> float:
        """The share of the pilot variance of ``sum(w_i * V_i)`` the kept controls explain."""
        w = np.asarray(weights, dtype=float)
        return self._r2(w, self._kept(w)[0])

    def used_controls(self, weights: Sequence[float]) -> tuple[str, ...]:
        """The labels of the controls :meth:`estimate` applies to this statistic."""
        if not self.uses_controls(weights):
            return ()
        return tuple(self.controls[j] for j in self._kept(np.asarray(weights, dtype=float))[0])

    def uses_controls(self, weights: Sequence[float]) -> bool:
        """Whether :meth:`estimate` applies controls to this statistic: when some are left
        after the tautological ones are dropped, always when the paths are pseudo-random;
        with Sobol points only when they explain at least ``control_min_r2`` of its variance
        on the pilot (decisions on independent paths, which keep the estimate unbiased)."""
        if self.control_mean is None or self.full_cov is None or not len(self.controls):
            return False
        if not self._kept(np.asarray(weights, dtype=float))[0]:
            return False
        return self.control_min_r2 <= 0.0 or self.pilot_r2(weights) >= self.control_min_r2

    def method_for(self, weights: Sequence[float]) -> str:
        """The method behind :meth:`estimate` of this statistic (``control+...`` only when
        controls are applied to it)."""
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
