"""``limitcase mutate [PATH]...``: how many payoff bugs do the declared checks catch?

Thin: parses, calls :func:`limitcase.mutate.run_mutation`, renders. Prints one line per
product (mutants, caught, error, survived, equivalent, score), then every survivor with its
diff and the check that would catch it, then the equivalent mutants. Exit status: 0 when no
original product fails its own checks and the score reaches ``--min-score`` (if given), 1
otherwise (a false alarm on an unmutated product is reported loudly), 2 for bad input.
"""

from __future__ import annotations

import json
import sys
import textwrap
from pathlib import Path
from typing import Any

import click

from ..cli_support import EXIT_FAIL, EXIT_OK, InputFailure, Progress, handle_errors
from ..suite import DEFAULT_ALPHA, DEFAULT_PATHS, DEFAULT_SEED


def _methods() -> tuple[str, ...]:
    from ..sampling import METHODS

    return METHODS


def _pct(x: float | None) -> str:
    return "-" if x is None else f"{100.0 * x:.1f}%"


def _table(report: Any) -> str:
    from ..mutate import product_scores

    rows = [("product", "family", "mutants", "caught", "error", "survived", "equivalent", "score")]
    for s in product_scores(report).values():
        rows.append((s.product + (" (FALSE ALARM)" if s.false_alarm else ""), s.family, str(s.mutants),
                     str(s.caught), str(s.error), str(s.survived), str(s.equivalent), _pct(s.score)))
    rows.append(("",) * 8)
    for s in report.families().values():
        rows.append((f"[{s.family}]", "", str(s.mutants), str(s.caught), str(s.error), str(s.survived),
                     str(s.equivalent), _pct(s.score)))
    c = report.counts()
    rows.append(("TOTAL", "", str(c["total"]), str(c["caught"]), str(c["error"]), str(c["survived"]),
                 str(c["equivalent"]), _pct(report.score)))
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    lines = []
    for r in rows:
        cells = [r[0].ljust(widths[0]), r[1].ljust(widths[1])] + [v.rjust(w) for v, w in zip(r[2:], widths[2:])]
        lines.append("  ".join(cells).rstrip())
    return "\n".join(lines)


def _survivors(report: Any) -> str:
    out = []
    for r in report.survivors():
        edge = " [differs only on edge paths]" if r.edge_only else ""
        out.append(f"SURVIVED {r.id}  {r.operator}: {r.description}  ({r.location}, {r.function}){edge}")
        out.append(textwrap.indent(r.diff.rstrip("\n"), "    "))
        out.append(textwrap.indent(textwrap.fill("-> " + r.suggestion, 100), "    "))
        out.append("")
    return "\n".join(out)


def _hidden(r: Any) -> bool:
    return bool(r.status == "equivalent" and r.suggestion)


def _equivalents(report: Any) -> str:
    eq = [r for r in report.results if r.status == "equivalent"]
    if not eq:
        return ""
    lines = []
    hidden = [r for r in eq if _hidden(r)]
    if hidden:
        lines.append(f"equivalent ONLY AT THE CHECK POINTS (they pay differently elsewhere; not scored): {len(hidden)}")
        for r in hidden:
            lines.append(f"  {r.id}  {r.operator}: {r.description}  ({r.location})")
            lines.append(textwrap.indent(textwrap.fill("-> " + r.suggestion, 100), "    "))
        lines.append("")
    plain = [r for r in eq if not _hidden(r)]
    if plain:
        lines.append(f"equivalent mutants (identical cash flows at every check point and off them; not scored): "
                     f"{len(plain)}")
        for r in plain:
            lines.append(f"  {r.id}  {r.operator}: {r.description}  ({r.location})")
    return "\n".join(lines)


@click.command("mutate")
@click.argument("paths_in", metavar="[PATH]...", nargs=-1, type=click.Path())
@click.option("--paths", type=click.IntRange(min=100), default=DEFAULT_PATHS, show_default=True,
              help="Paths per check for the mutants that survive the first pass.")
@click.option("--quick-paths", type=click.IntRange(min=100), default=None,
              help="Paths per check in the first pass (default 10000, at most --paths).")
@click.option("--equivalence-paths", type=click.IntRange(min=100), default=None,
              help="Simulated paths per parameter point when comparing a mutant with the original "
                   "(default 16384).")
@click.option("--seed", type=click.IntRange(min=0), default=DEFAULT_SEED, show_default=True,
              help="Seed of the run; mutant and original share every random stream.")
@click.option("--alpha", type=click.FloatRange(0.0, 1.0, min_open=True, max_open=True),
              default=DEFAULT_ALPHA, show_default=True,
              help="Family-wise false-alarm rate of each product's checks (Holm).")
@click.option("--workers", type=click.IntRange(min=1), default=None,
              help="Worker processes (default: all cores).")
@click.option("--method", type=click.Choice(_methods()), default="auto", show_default=True,
              help="Sampling method of the checks, as for 'limitcase check' (the equivalence "
                   "comparison always uses plain paths).")
@click.option("--operator", "operators", multiple=True, metavar="NAME",
              help="Apply only this mutation operator (repeatable; default all).")
@click.option("--select", "selects", multiple=True, metavar="TEXT",
              help="Mutate only the products whose name contains TEXT (repeatable).")
@click.option("--min-score", type=click.FloatRange(0.0, 1.0), default=None,
              help="Exit with status 1 when the overall score is below this fraction.")
@click.option("--show-caught", is_flag=True, help="Also list every caught and erroring mutant.")
@click.option("--json", "json_path", type=click.Path(dir_okay=False, writable=True), default=None,
              help="Write every mutant, its status, diff and suggestion to this JSON file.")
@click.option("--debug", is_flag=True, help="Show tracebacks for bad input.")
@handle_errors
def command(paths_in: tuple[str, ...], paths: int, quick_paths: int | None, equivalence_paths: int | None,
            seed: int, alpha: float, workers: int | None, method: str, operators: tuple[str, ...],
            selects: tuple[str, ...], min_score: float | None, show_caught: bool, json_path: str | None,
            debug: bool) -> None:
    """Mutate the payoff code of the products in PATH (files or folders of .py files;
    default: the shipped catalogue), run each product's own checks on every mutant and
    report which bugs are caught, which survive (with the check that would catch them)
    and the mutation score: (caught + error) / (caught + error + survived), equivalent
    mutants excluded. A mutant whose checks error (a crash) counts as detected."""
    from ..loader import load_products
    from ..mutate import EQUIVALENCE_PATHS, OPERATORS, QUICK_PATHS, run_mutation

    unknown = [o for o in operators if o not in OPERATORS]
    if unknown:
        raise InputFailure(f"--operator {unknown[0]!r} is not a mutation operator; choose from "
                           f"{', '.join(OPERATORS)}")
    quick = min(QUICK_PATHS, paths) if quick_paths is None else quick_paths
    if quick > paths:
        raise InputFailure(f"--quick-paths {quick} is above --paths {paths}; the first pass must be the cheaper one")
    products = load_products(paths_in)
    if selects:
        products = [p for p in products if any(s in p.__name__ for s in selects)]
    if not products:
        raise InputFailure(f"no Product classes found in {', '.join(paths_in) or 'the catalogue'}"
                           + (" matching --select" if selects else ""))
    progress = Progress("mutating", 1)

    def tick(done: int, total: int) -> None:
        progress.total = total
        progress(done, total)

    try:
        report = run_mutation(products, paths=paths, quick_paths=quick,
                              equivalence_paths=equivalence_paths or EQUIVALENCE_PATHS, seed=seed, alpha=alpha,
                              workers=workers, operators=list(operators) or None, method=method, progress=tick)
    finally:
        progress.close()

    click.echo(_table(report))
    click.echo("")
    if report.survivors():
        click.echo(_survivors(report))
    if show_caught:
        for r in report.results:
            if r.detected:
                click.echo(f"{r.status.upper():8} {r.id}  {r.operator}: {r.description}  ({r.location}) "
                           f"by {', '.join(r.detected_by) or 'the check run'} at {r.paths} paths")
        click.echo("")
    eq = _equivalents(report)
    if eq:
        click.echo(eq)
        click.echo("")
    c = report.counts()
    s = report.settings
    click.echo(
        f"mutation score {_pct(report.score)}: {c['caught']} caught + {c['error']} error (a crash counts as "
        f"detected) of {c['caught'] + c['error'] + c['survived']} non-equivalent mutants; {c['equivalent']} "
        f"equivalent, {len(report.discarded)} discarded (do not compile); {len(products)} products, "
        f"{report.runtime:.1f} s on {s['workers']} worker(s) (first pass {s['quick_paths']} paths, "
        f"survivors {s['paths']} paths, method {s['method']}, seed {s['seed']})"
    )
    cpu = s.get("cpu_seconds")
    if cpu:
        click.echo("CPU seconds: " + ", ".join(f"{k.replace('_', ' ')} {v:.1f}" for k, v in cpu.items()))
    weak = [e for e in s.get("excluded_cases", []) if e["paths"] == s["paths"]]
    if weak:
        click.echo(f"note: {len(weak)} case(s) fail on the unmutated product at its own level (Holm over its checks, "
                   f"{s['paths']} paths) and cannot detect its mutants: "
                   + ", ".join(f"{e['product']}/{e['case']}" for e in weak))
    hidden = sum(1 for r in report.results if _hidden(r))
    if hidden:
        click.echo(f"{hidden} equivalent mutant(s) pay differently off the check points: the checks never vary "
                   "what that code reads (listed above).")
    if report.false_alarms:
        click.echo("")
        click.echo(f"FALSE ALARM: {len(report.false_alarms)} check(s) of the UNMUTATED products do not pass at "
                   f"{s['paths']} paths (Holm over every check of the run, as 'limitcase check'): a false alarm "
                   "of the checks or a bug in the product itself; either way it needs a look:")
        for a in report.false_alarms:
            click.echo(f"  {a['product']}/{a['case']}: {a['verdict']} {a['message']}")
    if json_path:
        Path(json_path).write_text(json.dumps(report.to_dict(), indent=2, allow_nan=False) + "\n",
                                   encoding="utf-8")
        click.echo(f"wrote {json_path}")
    bad = bool(report.false_alarms) or (min_score is not None and (report.score or 0.0) < min_score)
    sys.exit(EXIT_FAIL if bad else EXIT_OK)
