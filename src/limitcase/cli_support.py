"""What every command shares: exit codes, the error boundary, run options, progress.

Commands live in :mod:`limitcase.commands`, one module each, each exposing ``command`` (a
click command); :mod:`limitcase.cli` collects them. Library errors become output in one
place, :func:`handle_errors`.
"""

from __future__ import annotations

import functools
import os
import sys
from typing import Any, Callable, Sequence

import click

from .errors import LimitcaseError
from .settings import DEFAULT_ALPHA, DEFAULT_PATHS, DEFAULT_SCHEDULER, DEFAULT_SEED, MIN_COMMAND_PATHS

__all__ = [
    "EXIT_OK", "EXIT_FAIL", "EXIT_INPUT", "InputFailure", "handle_errors", "show_progress",
    "Progress", "common_run_options", "scheduler_option", "select_checks", "write_outputs",
]

EXIT_OK, EXIT_FAIL, EXIT_INPUT = 0, 1, 2


class InputFailure(click.ClickException):
    """Bad input found by the library: exit 2 with its message."""

    exit_code = EXIT_INPUT


def handle_errors(fn: Callable[..., Any]) -> Callable[..., Any]:
    """The one place where library errors become command-line output."""

    @functools.wraps(fn)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        debug = kwargs.get("debug", False)
        try:
            return fn(*args, **kwargs)
        except LimitcaseError as exc:
            if debug:
                raise
            raise InputFailure(str(exc)) from exc

    return wrapper


def scheduler_option(fn: Callable[..., Any]) -> Callable[..., Any]:
    """``--scheduler ADDRESS``: run the command's work on a Dask cluster
    (:func:`limitcase.cluster.use_scheduler`); put it below ``handle_errors``."""

    @functools.wraps(fn)
    def wrapper(*args: Any, scheduler: str | None = DEFAULT_SCHEDULER, **kwargs: Any) -> Any:
        from .cluster import use_scheduler

        with use_scheduler(scheduler):
            return fn(*args, **kwargs)

    return click.option(
        "--scheduler", metavar="ADDRESS", default=DEFAULT_SCHEDULER,
        help="Run the work on a Dask cluster: its scheduler's address (tcp://host:8786), or local:N "
             "for N worker processes on this machine. Needs pip install 'limitcase[dask]'. "
             "The numbers do not depend on it.")(wrapper)


def show_progress() -> bool:
    """A progress bar only on an interactive terminal, never in CI or a pipe."""
    return sys.stderr.isatty() and not os.environ.get("CI")


class Progress:
    """A click progress bar that appears only after a couple of seconds on a terminal."""

    def __init__(self, label: str, total: int, delay: float = 2.0) -> None:
        import time

        self._time = time.monotonic
        self.start = self._time()
        self.label, self.total, self.delay = label, total, delay
        self.bar: Any = None
        self.done = 0

    def __call__(self, done: int, total: int | None = None) -> None:
        if not show_progress():
            return
        if self.bar is None and self._time() - self.start >= self.delay:
            self.bar = click.progressbar(length=self.total, label=self.label, file=sys.stderr)
            self.bar.__enter__()
        if self.bar is not None:
            self.bar.update(done - self.done)
        self.done = done

    def close(self) -> None:
        if self.bar is not None:
            self.bar.__exit__(None, None, None)


def common_run_options(fn: Callable[..., Any]) -> Callable[..., Any]:
    """Options shared by the commands that run checks."""
    opts = [
        click.option("--paths", type=click.IntRange(min=MIN_COMMAND_PATHS), default=DEFAULT_PATHS, show_default=True,
                     help="Monte Carlo paths per check."),
        click.option("--seed", type=click.IntRange(min=0), default=DEFAULT_SEED, show_default=True,
                     help="Seed of the run; every check draws its own streams from it."),
        click.option("--alpha", type=click.FloatRange(0.0, 1.0, min_open=True, max_open=True),
                     default=DEFAULT_ALPHA, show_default=True,
                     help="Family-wise false-alarm rate of the run (Holm's correction)."),
        click.option("--json", "json_path", type=click.Path(dir_okay=False, writable=True), default=None,
                     help="Write every case to this JSON file."),
        click.option("--junit", "junit_path", type=click.Path(dir_okay=False, writable=True), default=None,
                     help="Write JUnit XML, one testcase per case, to this file."),
        click.option("--debug", is_flag=True, help="Show tracebacks for bad input."),
    ]
    for opt in reversed(opts):
        fn = opt(fn)
    return fn


def select_checks(checks: Sequence[Any], patterns: Sequence[str]) -> list[Any]:
    """Checks whose ``product/case`` contains any of ``patterns`` (all when none given)."""
    if not patterns:
        return list(checks)
    return [c for c in checks if any(p in f"{c.product}/{c.case}" for p in patterns)]


def write_outputs(result: Any, command: str, json_path: str | None, junit_path: str | None, reproduce: str) -> None:
    """Write the JSON and JUnit files a command was asked for, and say so."""
    from .report.jsonfile import write_json
    from .report.junit import write_junit

    if json_path:
        write_json(json_path, result, command)
        click.echo(f"wrote {json_path}")
    if junit_path:
        write_junit(junit_path, result, command, reproduce)
        click.echo(f"wrote {junit_path}")
