"""``limitcase report``: the limit-behaviour dossier, one HTML page (and a Markdown twin)
per product plus an index, written to a folder."""

from __future__ import annotations

import sys

import click

from ..report.dossier import REPORT_PATHS
from ..cli_support import EXIT_FAIL, EXIT_OK, InputFailure, Progress, handle_errors, scheduler_option, write_outputs
from ..sampling import METHODS
from ..suite import DEFAULT_ALPHA, DEFAULT_SEED


@click.command("report")
@click.argument("paths_in", metavar="[PATH]...", nargs=-1, type=click.Path())
@click.option("-o", "--output", "outdir", type=click.Path(file_okay=False), default="limitcase-report", show_default=True,
              help="Folder to write index.html, one page per product, Markdown twins and img/.")
@click.option("--paths", type=click.IntRange(min=100), default=REPORT_PATHS, show_default=True,
              help="Monte Carlo paths per check and per sweep point (raise it for sharper pictures).")
@click.option("--seed", type=click.IntRange(min=0), default=DEFAULT_SEED, show_default=True,
              help="Seed of the run; every case draws its own streams from it.")
@click.option("--alpha", type=click.FloatRange(0.0, 1.0, min_open=True, max_open=True), default=DEFAULT_ALPHA,
              show_default=True, help="Family-wise false-alarm rate of the run (Holm's correction).")
@click.option("--points", type=click.IntRange(2, 20), default=7, show_default=True,
              help="Sweep points before each limit.")
@click.option("--select", "selects", multiple=True, metavar="TEXT",
              help="Only the products whose name contains TEXT (repeatable).")
@click.option("--regression-paths", type=click.IntRange(min=1000), default=None,
              help="Pilot paths for Longstaff-Schwartz policies (default 65536).")
@click.option("--method", type=click.Choice(METHODS), default="auto", show_default=True,
              help="Variance reduction of the checks, as `limitcase check --method` (sweeps and "
                   "convergence pictures use plain Monte Carlo).")
@click.option("--workers", type=click.IntRange(min=1), default=None,
              help="Worker processes for the checks (default: all cores). The numbers do not depend on it.")
@click.option("--no-audits", is_flag=True, help="Do not run the engine audits of the scenario models.")
@click.option("--audit-paths", type=click.IntRange(min=1000), default=None,
              help="Paths of each engine audit (default 100000, as limitcase.audits uses).")
@click.option("--json", "json_path", type=click.Path(dir_okay=False, writable=True), default=None,
              help="Also write every case to this JSON file.")
@click.option("--junit", "junit_path", type=click.Path(dir_okay=False, writable=True), default=None,
              help="Also write JUnit XML, one testcase per case, to this file.")
@click.option("--mutations", "mutations_path", type=click.Path(dir_okay=False), default=None,
              help="A 'limitcase mutate --json' file: show each product's mutation score and survivors.")
@click.option("--debug", is_flag=True, help="Show tracebacks for bad input.")
@handle_errors
@scheduler_option
def command(paths_in: tuple[str, ...], outdir: str, paths: int, seed: int, alpha: float, points: int,
            selects: tuple[str, ...], regression_paths: int | None, method: str, workers: int | None,
            no_audits: bool, audit_paths: int | None, json_path: str | None,
            junit_path: str | None, mutations_path: str | None, debug: bool) -> None:
    """Write the limit-behaviour dossier of the products in PATH (files or folders of .py
    files; default: the shipped catalogue): for each product its payoff, parameters, a
    sweep toward each declared limit with the base value, relations, audits and
    convergence pictures. Exit 0 when every case passes, 1 otherwise."""
    from ..engine import DEFAULT_REGRESSION_PATHS
    from ..loader import load_products
    from ..report.dossier import build_dossier, load_mutations, write_dossier
    from ..suite import default_workers

    mutations = load_mutations(mutations_path) if mutations_path else None
    products = load_products(paths_in)
    if not products:
        raise InputFailure(f"no Product classes found in {', '.join(paths_in) or 'the catalogue'}")
    progress = Progress("report", 1)

    def on_progress(done: int, total: int) -> None:
        progress.total = total
        progress(done)

    try:
        dossier = build_dossier(
            products, paths=paths, seed=seed, alpha=alpha, points=points,
            regression_paths=regression_paths or DEFAULT_REGRESSION_PATHS, selects=selects,
            sources=list(paths_in), audits=not no_audits, audit_paths=audit_paths, method=method,
            workers=workers or default_workers(),
            progress=on_progress,
        )
    finally:
        progress.close()
    dossier.mutations = mutations
    written = write_dossier(dossier, outdir)
    s = dossier.result.summary
    click.echo(f"{len(dossier.pages)} products, {s['total']} cases: {s['pass']} pass, {s['fail']} fail, "
               f"{s['error']} error (paths {paths}, seed {seed}, alpha {alpha:g}, Holm) "
               f"in {dossier.settings['seconds']} s")
    for o in dossier.result.outcomes:
        if o.verdict != "pass":
            click.echo(f"{o.verdict.upper()} {o.product}/{o.case}: {o.message}")
    for label, outs in dossier.audits.items():
        for o in outs:
            if o.verdict != "pass":
                click.echo(f"{o.verdict.upper()} audit {o.case} of {label}: {o.message}")
    for page in dossier.pages:
        for err in page.errors:
            click.echo(f"ERROR {page.name}: {err}")
        if page.formula is not None and page.formula.cross.status != "agree":
            click.echo(f"{page.formula.cross.status.upper()} {page.name} code against its formula: "
                       f"{page.formula.cross.message}")
    click.echo(f"wrote {len(written)} files to {outdir}; open {outdir}/index.html")
    reproduce = f"limitcase check {' '.join(paths_in)}".rstrip()
    if method != "auto":
        reproduce += f" --method {method}"
    write_outputs(dossier.result, "report", json_path, junit_path, reproduce)
    sys.exit(EXIT_OK if dossier.ok else EXIT_FAIL)
