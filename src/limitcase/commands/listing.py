"""``limitcase list``: the products found, their parameters with ranges, their declared
reductions and relations (nothing is priced)."""

from __future__ import annotations

import math
from typing import Any

import click

from ..cli_support import InputFailure, handle_errors
from ..report.jsonfile import INFINITY, dumps
from ..report.numbers import num

FORMAT_VERSION = 1


def describe(cls: type) -> dict[str, Any]:
    """A product class as a JSON-ready record (infinities as 1e308, as in every limitcase
    JSON file): declarations only, no pricing."""
    from ..document.describe import describe_product
    from ..report.jsonfile import jsonable

    desc = describe_product(cls)
    rec: dict[str, Any] = {
        "name": desc.name, "source": desc.source, "summary": desc.summary, "multi_asset": desc.multi_asset,
        "params": [{"name": p.name, "default": p.default, "low": p.low, "high": p.high, "low_open": p.low_open,
                    "high_open": p.high_open, "integer": p.integer, "range": p.range, "doc": p.doc}
                   for p in desc.params],
        "reductions": [], "relations": [], "error": desc.error,
    }
    if desc.error is None:
        rec["scenario"] = desc.scenario
        rec["early_exercise"] = desc.early_exercise
    rec["reductions"] = [{"name": r.name, "exact": r.exact, "note": r.note, "reason": r.reason, "changes": r.changes,
                          "becomes": r.becomes, "model_changes": r.model_changes, "error": r.error}
                         for r in desc.reductions]
    rec["relations"] = [{"name": r.name, "type": r.type, "sense": r.sense, "pathwise": r.pathwise, "what": r.what,
                         "error": r.error} for r in desc.relations]
    rec["ends"] = [{"param": e.param, "side": e.side, "end": e.end, "value": e.value, "status": e.status,
                    "text": e.text, "detail": e.detail, "suggestion": e.suggestion} for e in desc.ends]
    return jsonable(rec)


def _text(x: Any) -> str:
    """A listed number: a JSON-encoded infinity (1e308) shown as inf again."""
    if isinstance(x, float) and abs(x) >= INFINITY:
        x = math.copysign(math.inf, x)
    return num(x)


def _render(rec: dict[str, Any]) -> str:
    lines = [f"{rec['name']}  ({rec['source']})"]
    if rec["summary"]:
        lines.append(f"  {rec['summary']}")
    if rec.get("scenario"):
        lines.append(f"  scenario: {rec['scenario']}")
    if rec["error"]:
        lines.append(f"  ERROR {rec['error']}")
    if rec["params"]:
        lines.append("  parameters:")
        w = max(len(p["name"]) for p in rec["params"])
        for p in rec["params"]:
            default = _text(p["default"])
            lines.append(f"    {p['name'].ljust(w)}  {default:>8}  {p['range']:<22} {p['doc']}".rstrip())
    if rec["reductions"]:
        lines.append("  reductions:")
        for r in rec["reductions"]:
            if r["error"]:
                lines.append(f"    {r['name']}: ERROR {r['error']}")
                continue
            ch = ", ".join(f"{k}={_text(v)}" for k, v in r["changes"].items()) or "(own parameters)"
            how = "path by path" if r["exact"] else "in price"
            lines.append(f"    {r['name']}: {ch} -> {r['becomes']} ({how})")
    if rec["relations"]:
        lines.append("  relations:")
        for r in rec["relations"]:
            if r["error"]:
                lines.append(f"    {r['name']} [{r['type']}]: ERROR {r['error']}")
            else:
                how = ", path by path" if r["pathwise"] else ""
                lines.append(f"    {r['name']} [{r['type']}{how}]: {r['what']}")
    lines += _render_ends(rec.get("ends", []))
    return "\n".join(lines)


SHOULD_DECLARE = ("count", "large")
"""End statuses whose suggestion the listing prints: ends ``check --ends`` cannot check."""


def _render_ends(ends: list[dict[str, Any]]) -> list[str]:
    """The parameter ends: declared, only enumerated, or to declare (with the suggestion)."""
    if not ends:
        return []
    lines = ["  ends:"]
    w = max(len(f"{e['param']}.{e['side']}") for e in ends)
    for e in ends:
        detail = f" ({e['detail']})" if e["detail"] else ""
        lines.append(f"    {(e['param'] + '.' + e['side']).ljust(w)}  {_text(e['end']):>6}  {e['text']}{detail}")
        if e["status"] in SHOULD_DECLARE and e["suggestion"]:
            lines.append(f"    {' ' * w}          suggestion: {e['suggestion']}")
    return lines


@click.command("list")
@click.argument("paths_in", metavar="[PATH]...", nargs=-1, type=click.Path())
@click.option("--json", "as_json", is_flag=True, help="Print the listing as JSON instead of text.")
@click.option("--debug", is_flag=True, help="Show tracebacks for bad input.")
@handle_errors
def command(paths_in: tuple[str, ...], as_json: bool, debug: bool) -> None:
    """List the products in PATH (files or folders of .py files; default: the shipped
    catalogue): parameters with their ranges, reductions and relations. Nothing is priced."""
    from ..loader import load_products

    products = load_products(paths_in)
    if not products:
        raise InputFailure(f"no Product classes found in {', '.join(paths_in) or 'the catalogue'}")
    records = [describe(c) for c in products]
    if as_json:
        doc = {"tool": "limitcase", "format": FORMAT_VERSION, "command": "list", "products": records}
        click.echo(dumps(doc))
        return
    click.echo("\n\n".join(_render(r) for r in records))
    n_red = sum(len(r["reductions"]) for r in records)
    n_rel = sum(len(r["relations"]) for r in records)
    n_end = sum(1 for r in records for e in r.get("ends", []) if e["status"] in ("enumerated", "jump"))
    n_todo = sum(1 for r in records for e in r.get("ends", []) if e["status"] in SHOULD_DECLARE)
    click.echo(f"\n{len(records)} products, {n_red} reductions, {n_rel} relation cases, "
               f"{n_end} parameter ends only enumerated (check --ends), {n_todo} to declare")
