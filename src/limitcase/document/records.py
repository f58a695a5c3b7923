"""The dossier's data: plain records the library builds and ``limitcase.report`` renders.

Nothing here prices or imports anything that does: a record holds numbers, strings and the
:class:`limitcase.verdict.Outcome` of a check (itself a record). The builder
(:mod:`limitcase.document.build`) fills them; the renderers (:mod:`limitcase.report.dossier`,
:mod:`limitcase.report.plots`) read them and nothing else.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # pragma: no cover
    from ..verdict import Outcome

__all__ = [
    "Point", "SweepSeries", "ConvergenceSeries", "StepSeries", "FormulaRecord", "RecognitionRecord",
    "LimitRecord", "ParamInfo", "ReductionInfo", "RelationInfo", "EndRow", "ProductDescription", "MutationScore",
    "MutationSummary", "ProductPage", "Dossier",
]


@dataclass(frozen=True)
class Point:
    """One Monte Carlo estimate: value, standard error, paths."""

    value: float
    stderr: float
    paths: int


@dataclass(frozen=True)
class SweepSeries:
    """Prices along the sweep of one reduction toward its limit (the limit last).

    ``points`` holds every moved parameter's value at each point, ``param`` the one on the
    axis; ``discrete`` says the axis parameter takes whole or 0/1 values only (its points
    are drawn as separate categories, never joined as a continuous curve)."""

    product: str
    case: str
    param: str
    points: tuple[dict[str, Any], ...] = ()
    estimates: tuple[Point, ...] = ()
    target: float | None = None
    shared_paths: bool = False
    discrete: bool = False
    error: str | None = None
    info: str = ""

    @property
    def values(self) -> tuple[Any, ...]:
        """The axis parameter's value at each point."""
        return tuple(p[self.param] for p in self.points)


@dataclass(frozen=True)
class ConvergenceSeries:
    """The product at its defaults with a doubling sequence of path counts (nested runs)."""

    label: str
    estimates: tuple[Point, ...] = ()
    error: str | None = None

    @property
    def paths(self) -> tuple[int, ...]:
        return tuple(e.paths for e in self.estimates)

    def slope(self) -> float | None:
        """Least-squares slope of log(stderr) on log(paths); about -1/2 for Monte Carlo
        (the standard error of a mean of n independent paths is sigma / sqrt(n))."""
        pts = [(math.log(e.paths), math.log(e.stderr)) for e in self.estimates if e.stderr > 0]
        if len(pts) < 2:
            return None
        mx = sum(x for x, _ in pts) / len(pts)
        my = sum(y for _, y in pts) / len(pts)
        sxx = sum((x - mx) ** 2 for x, _ in pts)
        return sum((x - mx) * (y - my) for x, y in pts) / sxx if sxx > 0 else None


@dataclass(frozen=True)
class StepSeries:
    """The product at its defaults as the scenario model's time-step parameter is refined."""

    label: str
    param: str
    values: tuple[int, ...] = ()
    estimates: tuple[Point, ...] = ()
    error: str | None = None


@dataclass(frozen=True)
class FormulaRecord:
    """The stated payoff (LaTeX and plain text) and its cross-check against the code."""

    latex: str
    text: str
    note: str
    status: str  # "agree", "disagree", "not comparable", "error"
    message: str


@dataclass(frozen=True)
class RecognitionRecord:
    """Whether the formula at a limit is the base product's (sympy)."""

    status: str  # "equal", "differs", "undecided", "n/a", "error"
    message: str
    base: str = ""
    limit_latex: str | None = None
    limit_text: str | None = None
    base_latex: str | None = None
    base_text: str | None = None


@dataclass
class LimitRecord:
    """One declared reduction: its check's outcome, its sweep and the symbolic recognition."""

    name: str
    note: str
    outcome: "Outcome | None"
    sweep: SweepSeries | None = None
    recognition: RecognitionRecord | None = None


@dataclass(frozen=True)
class ParamInfo:
    """A declared parameter: its default, ends and range as the user wrote them."""

    name: str
    default: Any
    low: float
    high: float
    low_open: bool
    high_open: bool
    integer: bool
    boolean: bool
    range: str
    doc: str


@dataclass(frozen=True)
class ReductionInfo:
    """A declared reduction as declared (nothing priced)."""

    name: str
    exact: bool
    note: str
    reason: str
    changes: dict[str, Any]
    becomes: str | None
    model_changes: dict[str, Any]
    error: str | None = None


@dataclass(frozen=True)
class RelationInfo:
    """One case of a declared relation (nothing priced)."""

    name: str
    type: str
    sense: str | None
    pathwise: bool | None
    what: str
    error: str | None = None


@dataclass(frozen=True)
class EndRow:
    """One end of one parameter (:func:`limitcase.ends.end_table`): ``status`` is
    ``declared``, ``enumerated``, ``jump``, ``count``, ``open``, ``unreachable`` or
    ``large``; ``text`` says it in words; ``suggestion`` is the Reduction line to write."""

    param: str
    side: str
    end: float
    value: float
    status: str
    text: str
    detail: str = ""
    suggestion: str = ""


@dataclass
class ProductDescription:
    """A product class as declared: what ``limitcase list`` shows and a dossier page heads with."""

    name: str
    qualname: str
    source: str
    doc: str
    summary: str
    multi_asset: bool
    params: list[ParamInfo] = field(default_factory=list)
    scenario: str | None = None
    early_exercise: bool | None = None
    reductions: list[ReductionInfo] = field(default_factory=list)
    relations: list[RelationInfo] = field(default_factory=list)
    error: str | None = None
    ends: list[EndRow] = field(default_factory=list)


@dataclass(frozen=True)
class MutationScore:
    """A product's score in a saved mutation run: ``(caught + error) / counted``."""

    caught: int
    error: int
    survived: int
    equivalent: int
    score: float | None
    false_alarm: bool = False


@dataclass
class MutationSummary:
    """What a saved ``limitcase mutate --json`` run says of each product: its score and its
    surviving mutants (with their diffs and the check that would catch them). ``threshold``
    is the score asked for (``None``: a score is shown, not judged)."""

    source: str
    scores: dict[str, MutationScore]
    survivors: dict[str, list[dict[str, Any]]]
    threshold: float | None = None

    def verdict(self, name: str) -> str:
        """``"pass"``/``"fail"`` against the threshold, ``"info"`` when none is set."""
        sc = self.scores.get(name)
        if self.threshold is None or sc is None or sc.score is None:
            return "info"
        return "pass" if sc.score >= self.threshold else "fail"

    @property
    def ok(self) -> bool:
        return all(self.verdict(n) != "fail" for n in self.scores)


@dataclass
class ProductPage:
    """Everything one product's page shows."""

    name: str
    slug: str
    description: ProductDescription
    formula: FormulaRecord | None = None
    limits: list[LimitRecord] = field(default_factory=list)
    relations: list["Outcome"] = field(default_factory=list)
    audits: list["Outcome"] = field(default_factory=list)
    other: list["Outcome"] = field(default_factory=list)
    convergence: ConvergenceSeries | None = None
    steps: StepSeries | None = None
    errors: list[str] = field(default_factory=list)

    @property
    def model(self) -> str:
        return self.description.scenario or ""

    @property
    def outcomes(self) -> list["Outcome"]:
        red = [r.outcome for r in self.limits if r.outcome is not None]
        return red + self.relations + self.other


@dataclass
class Dossier:
    """The whole dossier: pages, the run's result (``limitcase.suite.RunResult``), settings,
    the engine audits by scenario model, and a saved mutation run if one was given."""

    pages: list[ProductPage]
    result: Any
    settings: dict[str, Any]
    audit_note: str = ""
    audits: dict[str, list["Outcome"]] = field(default_factory=dict)
    mutations: MutationSummary | None = None

    @property
    def summary(self) -> dict[str, int]:
        return self.result.summary

    @property
    def ok(self) -> bool:
        """Every case and audit passed, every stated formula agrees with its code, no product
        failed to build, and (with a threshold) every mutation score reaches it."""
        audits_ok = all(o.verdict == "pass" for outs in self.audits.values() for o in outs)
        formulas_ok = all(p.formula is None or p.formula.status == "agree" for p in self.pages)
        mutations_ok = self.mutations is None or all(self.mutations.verdict(p.name) != "fail" for p in self.pages)
        return (self.result.ok and audits_ok and formulas_ok and mutations_ok
                and all(not p.errors for p in self.pages))
