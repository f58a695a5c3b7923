"""Plain-text tables of outcomes for a terminal (no colour codes: logs stay readable)."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Sequence

from ..settings import reproduce_check
from .numbers import num

if TYPE_CHECKING:  # pragma: no cover
    from ..verdict import RunResult
    from ..verdict import Outcome

__all__ = ["render_table", "render_summary", "render_detection", "columns"]

_HEAD = ("product", "case", "kind", "MC value +/- SE", "reference", "diff", "z", "verdict")


def _num(x: float | None, digits: int = 5) -> str:
    return num(x, digits)


def columns(rows: Sequence[Sequence[str]], left: int = 3) -> list[str]:
    """Rows as aligned columns (the first ``left`` left-aligned, the rest right-aligned),
    the first row a heading underlined with dashes."""
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    lines = []
    for k, r in enumerate(rows):
        lines.append("  ".join(c.ljust(w) if i < left else c.rjust(w) for i, (c, w) in enumerate(zip(r, widths))).rstrip())
        if k == 0:
            lines.append("  ".join("-" * w for w in widths))
    return lines


def _row(o: "Outcome") -> tuple[str, ...]:
    if o.verdict in ("error", "skip") and o.value is None:
        return (o.product, o.case, o.kind, "-", "-", "-", "-", o.verdict.upper())
    value = f"{_num(o.value, 6)} +/- {_num(o.stderr, 2)}"
    sense = "" if o.sense == "==" else f"{o.sense} "
    return (
        o.product,
        o.case,
        o.kind,
        value,
        sense + _num(o.reference, 6),
        _num(o.difference, 3),
        _num(o.z, 3),
        o.verdict.upper(),
    )


def render_table(outcomes: Sequence["Outcome"]) -> str:
    """One row per check, then the messages of the checks that did not pass."""
    return "\n".join(columns([_HEAD] + [_row(o) for o in outcomes]))


def render_detection(result: Any) -> str:
    """Per check: method, paths, the smallest bias detected with 90% power (and relative to
    the reference), and under --precision whether the target was reached."""
    tested = [o for o in result.outcomes if o.detectable_bias is not None]
    m = len(tested)
    precise = "precision" in result.extra
    head = ["product", "case", "method", "paths", "detectable bias", "rel."] + (["precision"] if precise else [])
    rows = [head]
    for o in tested:
        rel = f"{100 * o.detectable_relative:.2g}%" if o.detectable_relative else "-"
        row = [o.product, o.case, o.method, str(o.paths), num(o.detectable_bias, 3), rel]
        if precise:
            status = {"reached": "reached", "budget": "BUDGET SPENT", "allowance": "below allowance",
                      "identity broken": "identity broken"}.get(o.precision_status, o.precision_status)
            row.append(f"{status} ({num(o.precision, 3)})" if o.precision is not None else status)
        rows.append(row)
    lines = [f"smallest bias each check detects with 90% power (Holm over {m} check{'' if m == 1 else 's'} at alpha "
             f"{result.alpha:g}; declared allowances included)"]
    lines += columns(rows)
    if precise:
        short = [o for o in result.outcomes if o.precision_status == "budget"]
        lines.append(f"precision {result.extra['precision']}: {m - len(short)} of {m} checks reached it"
                     + (f"; {len(short)} spent the budget of {result.extra['max_paths']} paths" if short else ""))
    notes = sorted({n for o in result.outcomes for n in (o.message or "").split("; ")
                    if n.startswith(("Sobol points not used", "no underlying control")) or "control_variates skipped" in n})
    lines.extend(f"note: {n}" for n in notes)
    return "\n".join(lines)


def render_summary(result: "RunResult", reproduce: str = "limitcase check") -> str:
    """Counts, then what went wrong and how to reproduce it."""
    s = result.summary
    lines = [
        f"{s['total']} check{'' if s['total'] == 1 else 's'}: {s['pass']} pass, {s['fail']} fail, {s['error']} error, "
        f"{s.get('skip', 0)} skip (paths {result.paths}, seed {result.seed}, family-wise false-alarm rate {result.alpha:g}, Holm)"
    ]
    allowances = [o for o in result.outcomes if o.allowance]
    for o in allowances:
        lines.append(f"  allowance {o.product}/{o.case}: {o.allowance:.4g} ({o.allowance_reason})")
    bad = [o for o in result.outcomes if o.verdict != "pass"]
    for o in bad:
        lines.append(f"{o.verdict.upper()} {o.product}/{o.case}: {o.message}")
        if o.verdict == "fail":
            lines.append(
                "  reproduce: " + reproduce_check(reproduce, seed=result.seed, paths=result.paths,
                                                  select=f"{o.product}/{o.case}")
            )
    return "\n".join(lines)
