"""``limitcase mutate [PATH]...``: how many payoff bugs do the declared checks catch?

Thin: parses, calls :func:`limitcase.mutate.run_mutation`, renders with
:mod:`limitcase.report.mutation`. Prints one line per product (mutants, caught, error,
survived, equivalent, score, share caught by failing checks), then every survivor with its
diff and the check that would catch it, then the equivalent mutants; progress on stderr. Exit status: 0 when no
original product fails its own checks and the score reaches ``--min-score`` (if given), 1
otherwise (a false alarm on an unmutated product is reported loudly), 2 for bad input.
"""

from __future__ import annotations

import json
import sys
import time
from pathlib import Path

import click

from ..cli_support import EXIT_FAIL, EXIT_OK, InputFailure, Progress, handle_errors, scheduler_option, show_progress
from ..report.mutation import render_mutation
from ..settings import DEFAULT_INNER_POINTS
from ..suite import DEFAULT_ALPHA, DEFAULT_PATHS, DEFAULT_SEED


def _methods() -> tuple[str, ...]:
    from ..sampling import METHODS

    return METHODS


class _Ticker:
    """Progress on stderr: a click bar on a terminal (:class:`Progress`), otherwise a line
    every ``every`` seconds (a CI log shows the run is alive and how far it got)."""

    def __init__(self, label: str, every: float = 30.0) -> None:
        self.bar = Progress(label, 1)
        self.label, self.every = label, every
        self.start = self.last = time.monotonic()

    def __call__(self, done: int, total: int) -> None:
        if show_progress():
            self.bar.total = total
            if self.bar.bar is not None:
                self.bar.bar.length = total
            self.bar(done, total)
            return
        now = time.monotonic()
        if now - self.last >= self.every:
            self.last = now
            click.echo(f"{self.label}: {done} of {total} tasks done, {now - self.start:.0f} s", err=True)

    def close(self) -> None:
        self.bar.close()


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
@click.option("--time-limit", type=click.FloatRange(min=0.0, min_open=True), default=None,
              help="Seconds one mutant may take per pass before it is stopped and reported as a timeout "
                   "(default: 20 times the unmutated product's own checks, at least 60 s).")
@click.option("--model", "model_spec", metavar="SPEC", default=None,
              help="Run every product and every mutant under this model instead of its scenario: a shipped "
                   "name with overrides (heston:kappa=2) or a file (my_model.py, my_model.py:Class:vol=0.3). "
                   "Products with another asset count are skipped.")
@click.option("--allow-long-run", is_flag=True,
              help="Run even when the estimated time is above the refusal limit (a week; see "
                   "limitcase.settings.RUN_REFUSE_SECONDS). Above an hour a warning gives the estimate.")
@click.option("--inner-points", type=click.IntRange(min=0), default=DEFAULT_INNER_POINTS, show_default=True,
              help="Interior parameter points at which every check of a mutant also runs (as in check); 0: none.")
@click.option("--debug", is_flag=True, help="Show tracebacks for bad input.")
@handle_errors
@scheduler_option
def command(paths_in: tuple[str, ...], paths: int, quick_paths: int | None, equivalence_paths: int | None,
            seed: int, alpha: float, workers: int | None, method: str, operators: tuple[str, ...],
            selects: tuple[str, ...], min_score: float | None, show_caught: bool, json_path: str | None,
            time_limit: float | None, debug: bool, model_spec: str | None = None,
            allow_long_run: bool = False, inner_points: int = DEFAULT_INNER_POINTS) -> None:
    """Mutate the payoff code of the products in PATH (files or folders of .py files;
    default: the shipped catalogue), run each product's own checks on every mutant and
    report which bugs are caught, which survive (with the check that would catch them)
    and the mutation score: (caught + error) / (caught + error + survived), equivalent
    mutants excluded. A mutant whose checks error (a crash) or that runs past the time
    limit counts as detected; the share caught by failing checks alone is shown apart."""
    from ..loader import load_products
    from ..mutate import EQUIVALENCE_PATHS, OPERATORS, QUICK_PATHS, run_mutation

    unknown = [o for o in operators if o not in OPERATORS]
    if unknown:
        raise InputFailure(f"--operator {unknown[0]!r} is not a mutation operator; choose from "
                           f"{', '.join(OPERATORS)}")
    quick = min(QUICK_PATHS, paths) if quick_paths is None else quick_paths
    if quick > paths:
        raise InputFailure(f"--quick-paths {quick} is above --paths {paths}; the first pass must be the cheaper one")
    model = None
    if model_spec is not None:
        from ..models.spec import resolve_model

        model = resolve_model(model_spec)
    products = load_products(paths_in)
    if selects:
        products = [p for p in products if any(s in p.__name__ for s in selects)]
    skipped = 0
    if model is not None:
        from ..plan import model_fits

        fitting = []
        for p in products:
            try:
                why = model_fits(p(), model)
            except Exception:  # cannot be made at its defaults: its checks will say so
                why = None
            if why is None:
                fitting.append(p)
            else:
                skipped += 1
                click.echo(f"skipped {p.__name__}: {why}")
        products = fitting
    if not products:
        raise InputFailure(f"no Product classes found in {', '.join(paths_in) or 'the catalogue'}"
                           + (" matching --select" if selects else "")
                           + (f"; {skipped} product(s) skipped under the model" if skipped else ""))
    progress = _Ticker("mutating")
    try:
        report = run_mutation(products, paths=paths, quick_paths=quick,
                              equivalence_paths=equivalence_paths or EQUIVALENCE_PATHS, seed=seed, alpha=alpha,
                              workers=workers, operators=list(operators) or None, method=method, progress=progress,
                              time_limit=time_limit, model=model, allow_long_run=allow_long_run,
                              warn=lambda note: click.echo(note, err=True), inner_points=inner_points)
    finally:
        progress.close()

    click.echo(render_mutation(report, show_caught=show_caught))
    if json_path:
        Path(json_path).write_text(json.dumps(report.to_dict(), indent=2, allow_nan=False) + "\n",
                                   encoding="utf-8")
        click.echo(f"wrote {json_path}")
    bad = bool(report.false_alarms) or (min_score is not None and (report.score or 0.0) < min_score)
    sys.exit(EXIT_FAIL if bad else EXIT_OK)
