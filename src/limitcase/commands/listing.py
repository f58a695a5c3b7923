"""``limitcase list``: the products found, their parameters with ranges, their declared
reductions and relations (nothing is priced)."""

from __future__ import annotations

import inspect
import json
import math
from pathlib import Path
from typing import Any

import click

from ..cli_support import InputFailure, handle_errors

FORMAT_VERSION = 1


def _number(x: Any) -> Any:
    """JSON-safe number: infinities as +-1e308, as in every limitcase JSON file."""
    if isinstance(x, float) and math.isinf(x):
        return 1e308 if x > 0 else -1e308
    return x


def _text(x: Any) -> str:
    if isinstance(x, float):
        return "inf" if x == math.inf else "-inf" if x == -math.inf else f"{x:g}"
    return str(x)


def describe(cls: type) -> dict[str, Any]:
    """A product class as a JSON-ready record: declarations only, no pricing."""
    from ..reduce import limit_product

    try:
        source = str(Path(inspect.getfile(cls)).resolve())
    except (TypeError, OSError):
        source = cls.__module__
    doc = inspect.getdoc(cls) or ""
    rec: dict[str, Any] = {
        "name": cls.__name__,
        "source": source,
        "summary": doc.strip().split("\n\n")[0].replace("\n", " ") if doc else "",
        "multi_asset": bool(getattr(cls, "multi_asset", False)),
        "params": [],
        "reductions": [],
        "relations": [],
        "error": None,
    }
    for name, spec in cls.param_specs().items():
        rec["params"].append({
            "name": name, "default": _number(spec.default), "low": _number(spec.low), "high": _number(spec.high),
            "low_open": spec.low_open, "high_open": spec.high_open, "integer": spec.integer,
            "range": spec.range_text(), "doc": spec.doc,
        })
    try:
        product = cls()
        model = product.scenario()
        rec["scenario"] = model.label()
        rec["early_exercise"] = product.early_exercise
    except Exception as exc:
        rec["error"] = f"cannot be built at its defaults: {type(exc).__name__}: {exc}"
        return rec
    for red in cls.reductions:
        entry: dict[str, Any] = {"name": red.name, "exact": bool(red.exact and red.reference_model is None),
                                 "note": red.note, "reason": red.reason, "changes": {}, "becomes": None,
                                 "model_changes": {k: _number(v) for k, v in dict(red.model_changes).items()},
                                 "error": None}
        try:
            at_limit = limit_product(product, red)
            entry["changes"] = {k: _number(at_limit.params()[k]) for k in red.changes if k in at_limit.params()}
            entry["becomes"] = red.becomes(at_limit).label()
        except Exception as exc:
            entry["error"] = f"{type(exc).__name__}: {exc}"
        rec["reductions"].append(entry)
    for rel in cls.relations:
        kind = type(rel).__name__
        try:
            for chk in rel.checks(product, model):
                rec["relations"].append({"name": chk.case, "type": kind, "sense": chk.sense,
                                         "pathwise": bool(chk.rules), "what": chk.note or chk.target_source,
                                         "error": chk.error})
        except Exception as exc:
            rec["relations"].append({"name": getattr(rel, "name", "") or kind, "type": kind, "sense": None,
                                     "pathwise": None, "what": "", "error": f"{type(exc).__name__}: {exc}"})
    return rec


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
            default = _text(p["default"] if abs(p["default"]) < 1e308 else math.copysign(math.inf, p["default"]))
            lines.append(f"    {p['name'].ljust(w)}  {default:>8}  {p['range']:<22} {p['doc']}".rstrip())
    if rec["reductions"]:
        lines.append("  reductions:")
        for r in rec["reductions"]:
            if r["error"]:
                lines.append(f"    {r['name']}: ERROR {r['error']}")
                continue
            ch = ", ".join(f"{k}={_text(v if abs(v) < 1e308 else math.copysign(math.inf, v))}" if isinstance(v, float)
                           else f"{k}={v}" for k, v in r["changes"].items()) or "(own parameters)"
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
    return "\n".join(lines)


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
        click.echo(json.dumps(doc, indent=2, allow_nan=False))
        return
    click.echo("\n\n".join(_render(r) for r in records))
    n_red = sum(len(r["reductions"]) for r in records)
    n_rel = sum(len(r["relations"]) for r in records)
    click.echo(f"\n{len(records)} products, {n_red} reductions, {n_rel} relation cases")
