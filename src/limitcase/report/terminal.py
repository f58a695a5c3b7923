"""Plain-text tables of outcomes for a terminal (no colour codes: logs stay readable)."""

from __future__ import annotations

import math
from typing import Sequence

from ..suite import RunResult
from ..verdict import Outcome

__all__ = ["render_table", "render_summary"]

_HEAD = ("product", "case", "kind", "MC value +/- SE", "reference", "diff", "z", "verdict")


def _num(x: float | None, digits: int = 5) -> str:
    if x is None:
        return "-"
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    return f"{x:.{digits}g}"


def _row(o: Outcome) -> tuple[str, ...]:
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


def render_table(outcomes: Sequence[Outcome]) -> str:
    """One row per check, then the messages of the checks that did not pass."""
    rows = [_HEAD] + [_row(o) for o in outcomes]
    widths = [max(len(r[i]) for r in rows) for i in range(len(_HEAD))]
    lines = []
    for k, r in enumerate(rows):
        lines.append("  ".join(c.ljust(w) if i < 3 else c.rjust(w) for i, (c, w) in enumerate(zip(r, widths))).rstrip())
        if k == 0:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)


def render_summary(result: RunResult, reproduce: str = "limitcase check") -> str:
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
                f"  reproduce: {reproduce} --seed {result.seed} --paths {result.paths} --select '{o.product}/{o.case}'"
            )
    return "\n".join(lines)
