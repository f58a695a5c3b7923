"""``limitcase report``: the limit-behaviour dossier, one HTML page (and a Markdown twin)
per product plus an index, written to a folder."""

from __future__ import annotations

import sys

import click

from ..cli_support import (
    EXIT_FAIL, EXIT_OK, InputFailure, Progress, handle_errors, output_dir, output_file, scheduler_option,
    write_outputs,
)
from ..settings import DEFAULT_ALPHA, DEFAULT_SEED, METHODS, REPORT_OUTPUT, REPORT_PATHS, REPORT_POINTS, reproduce_command


@click.command("report")
@click.argument("paths_in", metavar="[PATH]...", nargs=-1, type=click.Path())
@click.option("-o", "--output", "outdir", type=click.Path(file_okay=False), default=REPORT_OUTPUT, show_default=True,
              callback=output_dir,
              help="Folder to write index.html, one page per product, Markdown twins and img/.")
@click.option("--paths", type=click.IntRange(min=100), default=REPORT_PATHS, show_default=True,
              help="Monte Carlo paths per check and per sweep point (raise it for sharper pictures).")
@click.option("--seed", type=click.IntRange(min=0), default=DEFAULT_SEED, show_default=True,
              help="Seed of the run; every case draws its own streams from it.")
@click.option("--alpha", type=click.FloatRange(0.0, 1.0, min_open=True, max_open=True), default=DEFAULT_ALPHA,
              show_default=True, help="Family-wise false-alarm rate of the run (Holm's correction).")
@click.option("--points", type=click.IntRange(2, 20), default=REPORT_POINTS, show_default=True,
              help="Sweep points before each limit.")
@click.option("--select", "selects", multiple=True, metavar="TEXT",
              help="Only the products whose name contains TEXT (repeatable).")
@click.option("--regression-paths", type=click.IntRange(min=1000), default=None,
              help="Pilot paths for Longstaff-Schwartz policies (default 65536).")
@click.option("--method", type=click.Choice(METHODS), default="auto", show_default=True,
              help="Variance reduction of the checks, as `limitcase check --method` (sweeps and "
                   "convergence pictures use plain Monte Carlo).")
@click.option("--workers", type=click.IntRange(min=1), default=None,
              help="Worker processes for the checks, sweeps, convergence runs, audits and pictures (default: all "
                   "cores). The numbers do not depend on it.")
@click.option("--no-audits", is_flag=True, help="Do not run the engine audits of the scenario models.")
@click.option("--audit-paths", type=click.IntRange(min=1000), default=None,
              help="Paths of each engine audit (default 100000, as limitcase.audits uses).")
@click.option("--json", "json_path", type=click.Path(dir_okay=False), default=None, callback=output_file,
              help="Also write every case to this JSON file.")
@click.option("--junit", "junit_path", type=click.Path(dir_okay=False), default=None, callback=output_file,
              help="Also write JUnit XML, one testcase per case, to this file.")
@click.option("--mutations", "mutations_path", type=click.Path(dir_okay=False), default=None,
              help="A 'limitcase mutate --json' file: show each product's mutation score and survivors.")
@click.option("--min-score", type=click.FloatRange(0.0, 1.0), default=None,
              help="With --mutations: the mutation score each product must reach (as 'limitcase mutate "
                   "--min-score'); below it the product fails and the exit status is 1. Without it scores "
                   "are shown, not judged.")
@click.option("--model", "model_spec", metavar="SPEC", default=None,
              help="Every product under this model instead of its scenario (a shipped name with overrides, "
                   "or a model file; as limitcase check --model). Products with another asset count are listed, "
                   "not run.")
@click.option("--allow-long-run", is_flag=True,
              help="Run even when the estimated time is above the refusal limit (a week; see "
                   "limitcase.settings.RUN_REFUSE_SECONDS). Above an hour a warning gives the estimate.")
@click.option("--debug", is_flag=True, help="Show tracebacks for bad input.")
@handle_errors
@scheduler_option
def command(paths_in: tuple[str, ...], outdir: str, paths: int, seed: int, alpha: float, points: int,
            selects: tuple[str, ...], regression_paths: int | None, method: str, workers: int | None,
            no_audits: bool, audit_paths: int | None, json_path: str | None,
            junit_path: str | None, mutations_path: str | None, min_score: float | None, debug: bool,
            model_spec: str | None = None, allow_long_run: bool = False) -> None:
    """Write the limit-behaviour dossier of the products in PATH (files or folders of .py
    files; default: the shipped catalogue): for each product its payoff, parameters, a
    sweep toward each declared limit with the base value, relations, audits and
    convergence pictures. Exit 0 when every case passes, 1 otherwise."""
    from ..document import build_dossier, load_mutations
    from ..document.build import parallel_map
    from ..loader import load_products
    from ..report.dossier import write_dossier
    from ..settings import DEFAULT_REGRESSION_PATHS, default_workers

    from ..models.spec import resolve_model

    model = resolve_model(model_spec) if model_spec is not None else None
    workers = workers or default_workers()
    if min_score is not None and not mutations_path:
        raise InputFailure("--min-score judges the scores of a mutation run: give it with --mutations FILE")
    mutations = load_mutations(mutations_path, min_score) if mutations_path else None
    products = load_products(paths_in)
    if not products:
        raise InputFailure(f"no Product classes found in {', '.join(paths_in) or 'the catalogue'}")
    progress = Progress("report: checks, sweeps, convergence, audits", 1)

    def on_progress(done: int, total: int) -> None:
        progress.total = total
        progress(done)

    try:
        dossier = build_dossier(
            products, paths=paths, seed=seed, alpha=alpha, points=points,
            regression_paths=regression_paths or DEFAULT_REGRESSION_PATHS, selects=selects,
            sources=list(paths_in), audits=not no_audits, audit_paths=audit_paths, method=method,
            workers=workers,
            progress=on_progress,
            model=model,
            allow_long_run=allow_long_run,
            warn=lambda note: click.echo(note, err=True),
        )
    finally:
        progress.close()
    dossier.mutations = mutations
    drawing = Progress("report: pages and pictures", len(dossier.pages))
    try:
        written = write_dossier(dossier, outdir, progress=drawing,
                                mapper=lambda fn, items: parallel_map(fn, items, workers))
    finally:
        drawing.close()
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
        if page.formula is not None and page.formula.status != "agree":
            click.echo(f"{page.formula.status.upper()} {page.name} code against its formula: "
                       f"{page.formula.message}")
    if mutations is not None and mutations.threshold is not None:
        for name in mutations.scores:
            if mutations.verdict(name) == "fail" and any(p.name == name for p in dossier.pages):
                sc = mutations.scores[name]
                click.echo(f"FAIL {name} mutation score {100 * (sc.score or 0.0):.1f}% below the "
                           f"required {100 * mutations.threshold:.1f}%")
    click.echo(f"wrote {len(written)} files to {outdir}; open {outdir}/index.html")
    reproduce = reproduce_command("check", paths_in, seed=None, paths=None, method=method, alpha=alpha,
                                  model=model_spec)
    write_outputs(dossier.result, "report", json_path, junit_path, reproduce)
    sys.exit(EXIT_OK if dossier.ok else EXIT_FAIL)
