"""Records of a mutation run and its scores: per mutant, per product, per family, overall.

Part of :mod:`limitcase.mutate` (the package docstring describes the method).
"""

from __future__ import annotations

import collections
import inspect
import json
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any, Sequence

from ..errors import InputError
from .encoding import json_safe
from .mutants import Discarded

__all__ = [
    "MutantResult",
    "MutationReport",
    "ProductScore",
    "family_of",
    "product_scores",
    "score_of",
    "scores_from_json",
    "check_rate_of",
    "DETECTED",
]

FORMAT_VERSION = 1


# ----------------------------------------------------------------------------------------
# what became of each mutant


@dataclass(frozen=True)
class MutantResult:
    """What became of one mutant.

    ``status`` is ``"caught"`` (a check failed), ``"error"`` (a check errored: the payoff
    raised, returned NaN or a wrong shape, or the worker running it died; counts as
    detected), ``"timeout"`` (the mutant ran past the run's time limit and was stopped;
    counted as detected, with the crashes), ``"survived"`` or ``"equivalent"``.
    ``detected_by`` names the cases that saw it; ``paths`` the budget at which that
    happened (or at which it survived).
    """

    id: str
    product: str
    module: str
    family: str
    operator: str
    description: str
    function: str
    location: str
    line: int
    diff: str
    status: str
    paths: int = 0
    detected_by: tuple[str, ...] = ()
    message: str = ""
    suggestion: str = ""
    edge_only: bool = False
    params_involved: tuple[str, ...] = ()
    equivalence: dict | None = None
    off_checks: dict | None = None

    @property
    def detected(self) -> bool:
        return self.status in DETECTED

    def to_dict(self) -> dict:
        d = asdict(self)
        d["detected_by"] = list(self.detected_by)
        d["params_involved"] = list(self.params_involved)
        return json_safe(d)


@dataclass(frozen=True)
class ProductScore:
    """A product's mutation score: ``(caught + error) / (caught + error + survived)``
    (``None`` when it has no non-equivalent mutant).

    ``error`` counts every crash-like detection: checks that errored *and* mutants stopped
    at the time limit (``timeout`` of them). ``check_catch_rate`` is ``caught / (caught +
    error + survived)``: the share of non-equivalent mutants caught by a failing check
    alone, crashes and timeouts counted apart."""

    product: str
    module: str
    family: str
    mutants: int
    caught: int
    error: int
    survived: int
    equivalent: int
    discarded: int
    score: float | None
    false_alarm: bool = False
    timeout: int = 0
    check_catch_rate: float | None = None

    def to_dict(self) -> dict:
        return asdict(self)


DETECTED = ("caught", "error", "timeout")
"""The statuses that count as detected in the mutation score."""


def score_of(caught: int, error: int, survived: int) -> float | None:
    """The mutation score ``(caught + error) / (caught + error + survived)``; equivalent
    mutants are not counted; ``None`` when nothing was counted."""
    counted = caught + error + survived
    return (caught + error) / counted if counted else None


def check_rate_of(caught: int, error: int, survived: int) -> float | None:
    """The share of non-equivalent mutants caught by a failing check: ``caught / (caught +
    error + survived)`` (``error`` including timeouts); ``None`` when nothing was counted."""
    counted = caught + error + survived
    return caught / counted if counted else None


@dataclass
class MutationReport:
    """Every mutant's fate, the original products' own outcomes, the settings, the time."""

    results: list[MutantResult]
    discarded: list[Discarded]
    originals: dict[str, list[dict]]  # product -> outcomes at the full budget (to_dict)
    false_alarms: list[dict]
    settings: dict
    runtime: float
    products: list[tuple[str, str, str]]  # (name, module, family) in run order

    def counts(self, results: Sequence[MutantResult] | None = None) -> dict[str, int]:
        """Mutants by fate: ``caught``, ``error`` (crashes, timeouts included),
        ``survived``, ``equivalent``, ``total``."""
        rs = self.results if results is None else results
        c = {s: 0 for s in ("caught", "error", "survived", "equivalent")}
        for r in rs:
            c["error" if r.status == "timeout" else r.status] += 1
        c["total"] = len(rs)
        return c

    def catch(self, results: Sequence[MutantResult] | None = None) -> dict[str, Any]:
        """How the mutants were caught, crashes apart from failing checks:
        ``caught_by_check``, ``caught_by_error`` (a check errored or the worker died),
        ``timeout`` (stopped at the time limit), ``survived``, ``equivalent``, ``counted``
        (non-equivalent), ``check_catch_rate`` (``caught_by_check / counted``) and
        ``score`` (every detection over ``counted``, as :attr:`score`)."""
        rs = self.results if results is None else results
        n = collections.Counter(r.status for r in rs)
        counted = n["caught"] + n["error"] + n["timeout"] + n["survived"]
        return {
            "caught_by_check": n["caught"], "caught_by_error": n["error"], "timeout": n["timeout"],
            "survived": n["survived"], "equivalent": n["equivalent"], "counted": counted,
            "check_catch_rate": n["caught"] / counted if counted else None,
            "score": (counted - n["survived"]) / counted if counted else None,
        }

    def product_scores(self) -> dict[str, ProductScore]:
        """Each product's score, by product name, in run order (:func:`product_scores`)."""
        return product_scores(self)

    @property
    def score(self) -> float | None:
        c = self.counts()
        return score_of(c["caught"], c["error"], c["survived"])

    def survivors(self) -> list[MutantResult]:
        return [r for r in self.results if r.status == "survived"]

    def families(self) -> dict[str, ProductScore]:
        """Scores per family (the module's short name)."""
        out: dict[str, ProductScore] = {}
        for fam in dict.fromkeys(f for _, _, f in self.products):
            rs = [r for r in self.results if r.family == fam]
            c = self.counts(rs)
            out[fam] = ProductScore(
                fam, "", fam, c["total"], c["caught"], c["error"], c["survived"], c["equivalent"],
                sum(1 for d in self.discarded if _family_of_product(self, d.product) == fam),
                score_of(c["caught"], c["error"], c["survived"]),
                any(a["family"] == fam for a in self.false_alarms),
                sum(1 for r in rs if r.status == "timeout"), check_rate_of(c["caught"], c["error"], c["survived"]),
            )
        return out

    def to_dict(self) -> dict:
        """The JSON document of ``limitcase mutate --json``."""
        c = self.counts()
        return json_safe({
            "tool": "limitcase",
            "format": FORMAT_VERSION,
            "command": "mutate",
            "settings": self.settings,
            "score": self.score,
            "counts": {**c, "discarded": len(self.discarded),
                       "timeout": sum(1 for r in self.results if r.status == "timeout")},
            "catch": self.catch(),
            "runtime_seconds": round(self.runtime, 2),
            "false_alarms": self.false_alarms,
            "products": [s.to_dict() for s in product_scores(self).values()],
            "families": [s.to_dict() for s in self.families().values()],
            "mutants": [r.to_dict() for r in self.results],
            "discarded": [asdict(d) for d in self.discarded],
            "originals": self.originals,
        })


def _family_of_product(report: MutationReport, product: str) -> str:
    return next((f for n, _, f in report.products if n == product), "")


def family_of(cls: type) -> str:
    """A product's family: its module's short name (``barriers`` for
    ``limitcase_payoffs.barriers``), or the file's stem for a file loaded from a path."""
    mod = cls.__module__
    short = mod.rsplit(".", 1)[-1]
    if short.startswith("limitcase_user_"):
        try:
            return Path(inspect.getsourcefile(cls) or short).stem
        except TypeError:
            return short
    return short


# ----------------------------------------------------------------------------------------
# scores for other reports (the dossier)


def product_scores(report: MutationReport) -> dict[str, ProductScore]:
    """Each product's score in a report, by product name, in run order."""
    out: dict[str, ProductScore] = {}
    alarms = {a["product"] for a in report.false_alarms}
    for name, module, fam in report.products:
        rs = [r for r in report.results if r.product == name and r.module == module]
        c = report.counts(rs)
        out[name] = ProductScore(
            name, module, fam, c["total"], c["caught"], c["error"], c["survived"], c["equivalent"],
            sum(1 for d in report.discarded if d.product == name),
            score_of(c["caught"], c["error"], c["survived"]), name in alarms,
            sum(1 for r in rs if r.status == "timeout"), check_rate_of(c["caught"], c["error"], c["survived"]),
        )
    return out


def scores_from_json(path: str | Path) -> dict[str, ProductScore]:
    """Per-product scores from a file written by ``limitcase mutate --json`` (a mutation run
    takes minutes, so a report can read the last one rather than rerun it)."""
    try:
        doc = json.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise InputError(f"{path}: cannot read a mutation report: {exc}") from exc
    if not isinstance(doc, dict) or doc.get("command") != "mutate" or "products" not in doc:
        raise InputError(f"{path}: not a 'limitcase mutate --json' file (no 'command': 'mutate' and 'products')")
    fields = set(ProductScore.__dataclass_fields__)
    return {d["product"]: ProductScore(**{k: v for k, v in d.items() if k in fields}) for d in doc["products"]}
