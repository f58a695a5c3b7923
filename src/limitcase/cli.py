"""Command line: parse, call the library, render. No computing here.

Exit status, for every command: 0 when every check passes, 1 when any check fails or
errors, 2 for bad input or usage (with a message, and a traceback only under ``--debug``).
The ``check`` command lives here; every other command is a module of
:mod:`limitcase.commands` exposing ``command``, collected at import.
"""

from __future__ import annotations

import importlib
import pkgutil
import sys

import click

from . import __version__, commands
from .cli_support import (
    EXIT_FAIL,
    EXIT_OK,
    InputFailure,
    Progress,
    common_run_options,
    handle_errors,
    scheduler_option,
    select_checks,
    write_outputs,
)
from .settings import (
    DEFAULT_INNER_POINTS,
    DEFAULT_MAX_PATHS,
    DEFAULT_METHOD,
    DEFAULT_REGRESSION_PATHS,
    END_CHECKS,
    METHODS,
    MIN_MAX_PATHS,
    MIN_REGRESSION_PATHS,
    SECOND_MODEL,
    reproduce_command,
)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="limitcase")
def main() -> None:
    """Evidence that payoff code is right: each product is pushed to its degenerate
    limits and checked against closed forms, relations that must hold are verified on
    common paths, and the simulation itself is audited."""


@main.command()
@click.argument("paths_in", metavar="[PATH]...", nargs=-1, type=click.Path())
@common_run_options
@click.option("--select", "selects", multiple=True, metavar="TEXT",
              help="Run only the cases whose 'product/case' contains TEXT (repeatable).")
@click.option("--regression-paths", type=click.IntRange(min=MIN_REGRESSION_PATHS), default=None,
              help=f"Pilot paths for Longstaff-Schwartz policies (default {DEFAULT_REGRESSION_PATHS}).")
@click.option("--method", type=click.Choice(METHODS), default=DEFAULT_METHOD, show_default=True,
              help="Variance reduction: plain, antithetic pairs, control variates, Sobol points with a "
                   "Brownian bridge, or combinations; auto picks control variates with Sobol points where "
                   "they apply and antithetic pairs otherwise.")
@click.option("--precision", metavar="X", default=None,
              help="Add paths until every check's detectable bias (90% power) is at most X: a price "
                   "difference (0.01) or, with a trailing %, relative to the reference (0.5%).")
@click.option("--max-paths", type=click.IntRange(min=MIN_MAX_PATHS), default=DEFAULT_MAX_PATHS, show_default=True,
              help="Path budget of each check under --precision.")
@click.option("--workers", type=click.IntRange(min=1), default=None,
              help="Worker processes (default: all cores). The numbers do not depend on it.")
@click.option("--model", "model_spec", metavar="SPEC", default=None,
              help="Run every product under this model instead of its scenario: a shipped name with "
                   "overrides (heston:kappa=2,theta=0.04) or a file (my_model.py, my_model.py:Class:vol=0.3). "
                   "Products with another asset count are skipped.")
@click.option("--inner-points", type=click.IntRange(min=0), default=DEFAULT_INNER_POINTS, show_default=True,
              help="Interior parameter points at which every reduction and relation also runs, drawn "
                   "reproducibly from the seed inside the declared ranges (cases named CASE@p1, ...); 0: none.")
@click.option("--allow-long-run", is_flag=True,
              help="Run even when the estimated time is above the refusal limit (a week; see "
                   "limitcase.settings.RUN_REFUSE_SECONDS). Above an hour a warning gives the estimate.")
@click.option("--ends/--no-ends", "ends", default=END_CHECKS, show_default=True,
              help="Also check every parameter end no reduction declares: continuity into it (the price "
                   "there against the extrapolation of prices approaching it) and the sign of the price.")
@click.option("--second-model/--no-second-model", "second_model", default=SECOND_MODEL, show_default=True,
              help="Also run every path-by-path identity under Heston on warped (uneven) dates, "
                   "as cases named CASE~heston.")
@handle_errors
@scheduler_option
def check(paths_in: tuple[str, ...], paths: int, seed: int, alpha: float, json_path: str | None,
          junit_path: str | None, debug: bool, selects: tuple[str, ...], regression_paths: int | None,
          method: str, precision: str | None, max_paths: int, workers: int | None,
          model_spec: str | None = None, allow_long_run: bool = False,
          inner_points: int = DEFAULT_INNER_POINTS, ends: bool = END_CHECKS,
          second_model: bool = SECOND_MODEL) -> None:
    """Run every declared reduction and relation of the products in PATH (files or
    folders of .py files; default: the shipped catalogue)."""
    import time

    from .loader import load_products
    from .report.terminal import render_detection, render_summary, render_table
    from .settings import default_workers
    from .suite import parse_precision, run_checks

    target = parse_precision(precision) if precision is not None else None
    # user models, load failures, same-name classes: limitcase.plan
    from .models.spec import resolve_model
    from .plan import plan_checks

    model = resolve_model(model_spec) if model_spec is not None else None
    failures: list = []
    products = load_products(paths_in, failures=failures)
    if not products and not failures:
        raise InputFailure(f"no Product classes found in {', '.join(paths_in) or 'the catalogue'}")
    planned, skipped = plan_checks(products, model, failures, inner_points=inner_points, seed=seed, ends=ends,
                                   second_model=second_model)
    for s in skipped:
        click.echo(f"skipped {s.product}: {s.reason}")
    # a file that did not import is reported whatever --select says: nothing is lost
    checks = [c for c in planned if c.kind == "load"] + select_checks([c for c in planned if c.kind != "load"], selects)
    if not checks:
        raise InputFailure("no checks to run: the products declare no reductions or relations"
                           + (" matching --select" if selects else "")
                           + (f"; {len(skipped)} product(s) skipped under the model" if skipped else ""))
    workers = workers or default_workers()
    from .sizing import enforce, estimate_run

    size = estimate_run(checks, paths=paths, workers=workers, max_paths=max_paths if target is not None else None,
                        regression_paths=regression_paths or DEFAULT_REGRESSION_PATHS)
    warning = enforce(size, allow_long_run=allow_long_run)  # refused above the limit: exit 2, before any work
    if warning:
        click.echo(warning, err=True)
    progress = Progress("checking", len(checks))
    start = time.monotonic()
    try:
        result = run_checks(checks, paths=paths, seed=seed, alpha=alpha,
                            regression_paths=regression_paths or DEFAULT_REGRESSION_PATHS,
                            progress=progress, method=method, precision=target, max_paths=max_paths,
                            workers=workers, allow_long_run=True)  # sized above
    finally:
        progress.close()
    result.extra["workers"] = workers
    if model is not None:
        result.extra["model"] = model.label()
        result.extra["skipped"] = [{"product": s.product, "reason": s.reason} for s in skipped]
    result.extra["wall_seconds"] = round(time.monotonic() - start, 3)
    click.echo(render_table(result.outcomes))
    click.echo("")
    click.echo(render_detection(result))
    click.echo("")
    # seed and paths are appended per failing check by the renderers
    reproduce = reproduce_command("check", paths_in, seed=None, paths=None, method=method, precision=precision,
                                  max_paths=max_paths, alpha=alpha, model=model_spec, inner_points=inner_points,
                                  ends=ends, second_model=second_model)
    click.echo(render_summary(result, reproduce=reproduce))
    used = result.extra.get("processes", 1)
    click.echo(f"{result.extra['wall_seconds']:.1f} s on " + ("1 process" if used == 1 else f"{used} worker processes"))
    write_outputs(result, "check", json_path, junit_path, reproduce)
    sys.exit(EXIT_OK if result.ok else EXIT_FAIL)


def _register_commands() -> None:
    for info in sorted(pkgutil.iter_modules(commands.__path__), key=lambda i: i.name):
        if not info.name.startswith("_"):
            module = importlib.import_module(f"{commands.__name__}.{info.name}")
            main.add_command(module.command)


_register_commands()


if __name__ == "__main__":  # pragma: no cover
    main()
