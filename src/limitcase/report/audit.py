"""Rendering of ``limitcase audit``: the outcome table and a legend for its rows whose value
is not a price.

Most audit rows compare a Monte Carlo price with a reference price, as a check's row does;
a few compare a statistic with its target (a slope, a chi-square statistic, a price
difference). The table keeps one layout and the legend says, for each such row present,
what its value, its "+/- SE" and its reference are (the table itself is
:func:`limitcase.report.render_table`'s). Formats plain outcome records; imports nothing.
"""

from __future__ import annotations

from typing import Any, Sequence

__all__ = ["AUDIT_ROW_MEANINGS", "render_audit_legend"]

AUDIT_ROW_MEANINGS: dict[str, str] = {
    "paths": "value = slope of log(standard error) against log(paths) over disjoint groups, +/- its standard "
             "error; reference -0.5 (the standard error falls like 1/sqrt(paths))",
    "seeds": "value = Cochran's Q of the prices of K independent seeds, +/- its standard deviation "
             "sqrt(2(K - 1)); reference its degrees of freedom K - 1",
    "steps_flat": "value = the largest price difference between two step sizes (an exact scheme), "
                  "+/- its standard error; reference 0",
    "steps_order": "value = |d1| - 2^p |d2|, successive step-halving price differences against the declared "
                   "weak order p, +/- its standard error; must be >= 0",
}
"""What the value and reference columns hold for the audit rows that are not prices
(``martingale``, ``steps_limit`` and the degeneration rows are prices: a discounted asset
or option value against its reference)."""


def render_audit_legend(outcomes: Sequence[Any]) -> str:
    """The legend lines for the non-price audit rows present in ``outcomes`` (empty text
    when there are none)."""
    present = [c for c in AUDIT_ROW_MEANINGS if any(getattr(o, "case", None) == c for o in outcomes)]
    if not present:
        return ""
    width = max(len(c) for c in present)
    lines = ["rows that are not prices:"]
    lines += [f"  {c.ljust(width)}  {AUDIT_ROW_MEANINGS[c]}" for c in present]
    return "\n".join(lines)
