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
    select_checks,
    write_outputs,
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
@click.option("--regression-paths", type=click.IntRange(min=1000), default=None,
              help="Pilot paths for Longstaff-Schwartz policies (default 65536).")
@handle_errors
def check(paths_in: tuple[str, ...], paths: int, seed: int, alpha: float, json_path: str | None,
          junit_path: str | None, debug: bool, selects: tuple[str, ...], regression_paths: int | None) -> None:
    """Run every declared reduction and relation of the products in PATH (files or
    folders of .py files; default: the shipped catalogue)."""
    from .engine import DEFAULT_REGRESSION_PATHS
    from .loader import load_products
    from .reduce import checks_for
    from .report import render_summary, render_table
    from .suite import run_checks

    products = load_products(paths_in)
    if not products:
        raise InputFailure(f"no Product classes found in {', '.join(paths_in) or 'the catalogue'}")
    checks = select_checks([c for p in products for c in checks_for(p)], selects)
    if not checks:
        raise InputFailure("no checks to run: the products declare no reductions or relations"
                           + (" matching --select" if selects else ""))
    progress = Progress("checking", len(checks))
    try:
        result = run_checks(checks, paths=paths, seed=seed, alpha=alpha,
                            regression_paths=regression_paths or DEFAULT_REGRESSION_PATHS,
                            progress=progress)
    finally:
        progress.close()
    click.echo(render_table(result.outcomes))
    click.echo("")
    reproduce = f"limitcase check {' '.join(paths_in)}".rstrip()
    click.echo(render_summary(result, reproduce=reproduce))
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
