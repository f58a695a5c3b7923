"""Sentences the dossier's HTML and Markdown pages share: counts, the settings line, the
reproducing command, a mutation score in words."""

from __future__ import annotations

from ..settings import reproduce_command
from typing import TYPE_CHECKING, Sequence

from .numbers import count

if TYPE_CHECKING:  # pragma: no cover
    from ..document.records import Dossier
    from ..verdict import Outcome

__all__ = ["counts", "reproduce", "score_text", "settings_line"]


def reproduce(d: "Dossier", select: str = "") -> str:
    """The ``limitcase check`` command that reruns the dossier's cases (one product's with
    ``select``)."""
    return reproduce_command("check", d.settings.get("sources") or [], seed=d.settings["seed"],
                             paths=d.settings["paths"], alpha=d.settings["alpha"],
                             method=d.settings.get("method"), select=select or None)


def settings_line(d: "Dossier") -> str:
    s = d.settings
    return (f"paths {count(s['paths'])} per check and per sweep point, seed {s['seed']}, checks sampled by "
            f"method {s.get('method', 'auto')}, family-wise false-alarm rate {s['alpha']:g} (Holm over all "
            f"{d.summary['total']} cases of the run); sweeps and convergence runs plain Monte Carlo; "
            f"bands are 95% (value ± 1.96 standard errors)")


def counts(outs: Sequence["Outcome"]) -> dict[str, int]:
    c = {"pass": 0, "fail": 0, "error": 0}
    for o in outs:
        c[o.verdict] = c.get(o.verdict, 0) + 1
    return c


def score_text(d: "Dossier", name: str) -> str:
    """A product's mutation score in words (and the threshold it is judged against)."""
    assert d.mutations is not None
    sc = d.mutations.scores.get(name)
    if sc is None or sc.score is None:
        return "no mutant that changes a cash flow"
    text = (f"{100 * sc.score:.1f}%: {sc.caught} caught, {sc.error} by an error, {sc.survived} survived "
            f"of {sc.caught + sc.error + sc.survived}; {sc.equivalent} equivalent (not scored)")
    t = d.mutations.threshold
    if t is not None:
        text += f"; required {100 * t:.1f}%"
    return text
