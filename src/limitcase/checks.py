"""The records the reducer hands to the runner.

:class:`Check` is one thing to verify by Monte Carlo; :class:`PathRule` a combination of
its legs' present values that must hold on every path; :class:`PathRuleResult` how a rule
fared over the paths priced. They are plain data: the reducer (:mod:`limitcase.reduce`)
makes them, the engine and the suite read them, and neither needs the other to do so.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Callable

if TYPE_CHECKING:  # pragma: no cover
    from .models.base import Model
    from .product import Product

__all__ = ["Check", "PathRule", "PathRuleResult", "SENSES", "Origin"]

SENSES = ("==", ">=", "<=")
"""How a statistic is compared with its target (and a path rule with zero)."""


@dataclass(frozen=True, slots=True)
class PathRule:
    """A combination of the legs' present values that must hold on every path:
    ``sum(w_i * pv_i) == 0`` (or ``>= 0``, ``<= 0``) to floating-point tolerance."""

    weights: tuple[float, ...]
    sense: str = "=="
    rtol: float = 1e-9
    atol: float = 1e-9


@dataclass
class PathRuleResult:
    """How a :class:`PathRule` fared: violations and the worst one."""

    rule: PathRule
    violations: int = 0
    worst: float = 0.0
    worst_path: int = -1

    def merge(self, violations: int, worst: float, worst_path: int) -> None:
        """Add one block's tally (blocks merged in order: the first worst path is kept)."""
        self.violations += violations
        if violations and worst > self.worst:
            self.worst, self.worst_path = worst, worst_path


@dataclass(frozen=True)
class Origin:
    """Where an interior-point check came from (:mod:`limitcase.interior`): the product at
    the drawn point, the model its declarations were applied under, the declaration's case
    name at the defaults and the point's number (the ``@pN`` of the case name). The runner
    rebuilds the check at simpler points from it when it fails (shrinking)."""

    product: "Product"
    model: "Model"
    base_case: str
    index: int
    drawn: tuple[tuple[str, float], ...] = ()


@dataclass(frozen=True)
class Check:
    """One thing to verify by Monte Carlo: legs priced on common paths, path rules that
    must hold on every path, and a statistic ``sum(weights * prices)`` compared with
    ``target`` under ``sense`` (``==``, ``>=`` or ``<=``) and a declared allowance.

    A check that could not be built carries ``error`` (and no legs): the runner reports it
    as an error for that check only. A check whose target does not exist under its model (the
    base product has no reference there: :class:`~limitcase.errors.NoReference`) carries
    ``skip``, the reason: the runner reports it as a skip, never priced, never a pass, and
    outside Holm's family (the parts that need no reference are checks of their own).

    ``origin`` marks a check at an interior parameter point (:mod:`limitcase.interior`);
    ``path_share`` is the share of the run's paths it is priced with (sized from the power it
    needs, :data:`limitcase.settings.INNER_PATH_SHARE`). ``direct``, when given, decides the
    check without Monte Carlo (a deterministic check on given paths, :mod:`limitcase.ties`):
    it is called with the check's ``legs`` (so a check rebuilt on other legs decides on them)
    and returns ``(ok, message, paths)``, ``ok`` None for nothing to decide (a skip)."""

    product: str
    case: str
    kind: str
    legs: tuple["Product", ...] = ()
    model: "Model | None" = None
    weights: tuple[float, ...] = ()
    target: float = 0.0
    target_source: str = ""
    sense: str = "=="
    rules: tuple[PathRule, ...] = ()
    allowance: float = 0.0
    allowance_reason: str = ""
    note: str = ""
    error: str | None = None
    skip: str | None = None
    origin: Origin | None = None
    path_share: float = 1.0
    direct: "Callable[[tuple[Product, ...]], tuple[bool | None, str, int]] | None" = None
    allowance_weights: tuple[float, ...] = ()
    """When given, the allowance also includes ``|sum(allowance_weights * prices)|``, estimated on
    the same paths: an error bound the data give (an extrapolation's truncation error,
    :mod:`limitcase.ends`)."""

    @property
    def label(self) -> str:
        return f"{self.product}/{self.case}"
