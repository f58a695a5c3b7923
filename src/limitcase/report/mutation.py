"""Plain-text rendering of a mutation run (``limitcase mutate``): the score table, the
survivors with their diffs and advice, the equivalent mutants, the summary lines.

Reads a :class:`limitcase.mutate.MutationReport` through its records and methods only;
imports nothing that prices (the report is built by the library, rendered here).
"""

from __future__ import annotations

import textwrap
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # pragma: no cover - for the type checker only
    from ..mutate.scores import MutantResult, MutationReport

__all__ = [
    "render_mutation",
    "render_scores",
    "render_survivors",
    "render_detected",
    "render_equivalents",
    "render_summary",
    "pct",
]

WIDTH = 100
"""Advice paragraphs are wrapped at this width."""


def pct(x: float | None) -> str:
    """A fraction as a percentage with one decimal, ``-`` for none."""
    return "-" if x is None else f"{100.0 * x:.1f}%"


def _score_row(label: str, family: str, s: Any) -> tuple[str, ...]:
    return (label, family, str(s.mutants), str(s.caught), str(s.error), str(s.survived), str(s.equivalent),
            pct(s.score), pct(s.check_catch_rate))


def render_scores(report: "MutationReport") -> str:
    """One row per product, one per family, and the total: mutants, caught (by a failing
    check), error (crashes and timeouts), survived, equivalent, score, and the share caught by
    failing checks alone."""
    rows = [("product", "family", "mutants", "caught", "error", "survived", "equivalent", "score", "by checks")]
    for s in report.product_scores().values():
        rows.append(_score_row(s.product + (" (FALSE ALARM)" if s.false_alarm else ""), s.family, s))
    rows.append(("",) * len(rows[0]))
    for s in report.families().values():
        rows.append(_score_row(f"[{s.family}]", "", s))
    c, catch = report.counts(), report.catch()
    rows.append(("TOTAL", "", str(c["total"]), str(c["caught"]), str(c["error"]), str(c["survived"]),
                 str(c["equivalent"]), pct(report.score), pct(catch["check_catch_rate"])))
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    lines = []
    for r in rows:
        cells = [r[0].ljust(widths[0]), r[1].ljust(widths[1])] + [v.rjust(w) for v, w in zip(r[2:], widths[2:])]
        lines.append("  ".join(cells).rstrip())
    return "\n".join(lines)


def render_survivors(report: "MutationReport") -> str:
    """Every survivor: what changed, where, its diff and the check that would catch it."""
    out = []
    for r in report.survivors():
        edge = " [differs only on edge paths]" if r.edge_only else ""
        out.append(f"SURVIVED {r.id}  {r.operator}: {r.description}  ({r.location}, {r.function}){edge}")
        out.append(textwrap.indent(r.diff.rstrip("\n"), "    "))
        out.append(textwrap.indent(textwrap.fill("-> " + r.suggestion, WIDTH), "    "))
        out.append("")
    return "\n".join(out)


def render_detected(report: "MutationReport") -> str:
    """Every detected mutant (caught, error, timeout), one line each."""
    lines = []
    for r in report.results:
        if r.detected:
            by = ", ".join(r.detected_by) or ("the time limit" if r.status == "timeout" else "the check run")
            lines.append(f"{r.status.upper():8} {r.id}  {r.operator}: {r.description}  ({r.location}) "
                         f"by {by} at {r.paths} paths")
    return "\n".join(lines)


def render_timeouts(report: "MutationReport") -> str:
    """The mutants stopped at the time limit, with what stopped them."""
    lines = []
    for r in report.results:
        if r.status == "timeout":
            lines.append(f"TIMEOUT  {r.id}  {r.operator}: {r.description}  ({r.location}): {r.message}")
    return "\n".join(lines)


def _hidden(r: "MutantResult") -> bool:
    return bool(r.status == "equivalent" and r.suggestion)


def render_equivalents(report: "MutationReport") -> str:
    """The equivalent mutants: first those that pay differently off the check points (with
    advice), then those identical everywhere they were compared."""
    eq = [r for r in report.results if r.status == "equivalent"]
    if not eq:
        return ""
    lines = []
    hidden = [r for r in eq if _hidden(r)]
    if hidden:
        lines.append(f"equivalent ONLY AT THE CHECK POINTS (they pay differently elsewhere; not scored): {len(hidden)}")
        for r in hidden:
            lines.append(f"  {r.id}  {r.operator}: {r.description}  ({r.location})")
            lines.append(textwrap.indent(textwrap.fill("-> " + r.suggestion, WIDTH), "    "))
        lines.append("")
    plain = [r for r in eq if not _hidden(r)]
    if plain:
        lines.append(f"equivalent mutants (identical cash flows at every check point and off them; not scored): "
                     f"{len(plain)}")
        for r in plain:
            lines.append(f"  {r.id}  {r.operator}: {r.description}  ({r.location})")
    return "\n".join(lines)


def render_summary(report: "MutationReport") -> str:
    """The score and how it was reached, the catch by failing checks alone, the settings,
    the CPU seconds, the cases that cannot detect anything, and any false alarm."""
    c, catch, s = report.counts(), report.catch(), report.settings
    limit = s.get("time_limit")
    limit_text = "" if limit is None else (
        ", time limit auto" if limit == "auto" else f", time limit {float(limit):g} s")
    lines = [
        f"mutation score {pct(report.score)}: {c['caught']} caught + {c['error']} error (a crash counts as "
        f"detected) of {c['caught'] + c['error'] + c['survived']} non-equivalent mutants; {c['equivalent']} "
        f"equivalent, {len(report.discarded)} discarded (do not compile); {len(report.products)} products, "
        f"{report.runtime:.1f} s on {s['workers']} worker(s) (first pass {s['quick_paths']} paths, "
        f"survivors {s['paths']} paths, method {s['method']}, seed {s['seed']}{limit_text})",
        f"caught by a failing check: {pct(catch['check_catch_rate'])} ({catch['caught_by_check']} of "
        f"{catch['counted']}); by a crash: {catch['caught_by_error']}; stopped at the time limit: "
        f"{catch['timeout']}; survived: {catch['survived']}",
    ]
    cpu = s.get("cpu_seconds")
    if cpu:
        lines.append("CPU seconds: " + ", ".join(f"{k.replace('_', ' ')} {v:.1f}" for k, v in cpu.items()))
    weak = s.get("excluded_cases", [])
    if weak:
        lines.append(f"note: {len(weak)} case(s) fail on the unmutated product at its own level (Holm over its "
                     "checks) and cannot detect its mutants: "
                     + ", ".join(f"{e['product']}/{e['case']} ({e['paths']:,} paths)" for e in weak))
    hidden = sum(1 for r in report.results if _hidden(r))
    if hidden:
        lines.append(f"{hidden} equivalent mutant(s) pay differently off the check points: the checks never vary "
                     "what that code reads (listed above).")
    if report.false_alarms:
        lines.append("")
        lines.append(f"FALSE ALARM: {len(report.false_alarms)} check(s) of the UNMUTATED products do not pass "
                     "(Holm over every check of the run, as 'limitcase check'): a false alarm of the checks or a "
                     "bug in the product itself; either way it needs a look:")
        for a in report.false_alarms:
            lines.append(f"  {a['product']}/{a['case']} ({a['paths']:,} paths): {a['verdict']} {a['message']}")
    return "\n".join(lines)


def render_mutation(report: "MutationReport", *, show_caught: bool = False) -> str:
    """The whole terminal report of a mutation run, as ``limitcase mutate`` prints it."""
    parts = [render_scores(report), ""]
    if report.survivors():
        parts.append(render_survivors(report))
    timeouts = render_timeouts(report)
    if timeouts:
        parts += [timeouts, ""]
    if show_caught:
        parts += [render_detected(report), ""]
    eq = render_equivalents(report)
    if eq:
        parts += [eq, ""]
    parts.append(render_summary(report))
    return "\n".join(parts)
