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
from .settings import DEFAULT_ALPHA, DEFAULT_PATHS, DEFAULT_SEED, MIN_COMMAND_PATHS

__all__ = [
    "EXIT_OK", "EXIT_FAIL", "EXIT_INPUT", "InputFailure", "handle_errors", "show_progress",
    "Progress", "common_run_options", "select_checks", "write_outputs", "output_file", "output_dir",
    "check_output_file", "check_output_dir",
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


def _nearest_existing(path: str) -> str:
    p = os.path.abspath(path)
    while not os.path.exists(p):
        parent = os.path.dirname(p)
        if parent == p:
            break
        p = parent
    return p


def check_output_file(path: str) -> str | None:
    """Why ``path`` cannot be written as an output file, or ``None`` when it can (checked
    before a run, so that its results are never lost at the end)."""
    if os.path.isdir(path):
        return "it is a folder"
    if os.path.exists(path):
        return None if os.access(path, os.W_OK) else "the file is not writable"
    parent = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(parent):
        return f"the folder {parent} does not exist"
    if not os.access(parent, os.W_OK | os.X_OK):
        return f"the folder {parent} is not writable"
    return None


def check_output_dir(path: str) -> str | None:
    """Why ``path`` cannot be (created and) written as an output folder, or ``None``."""
    if os.path.exists(path):
        if not os.path.isdir(path):
            return "it is a file, not a folder"
        return None if os.access(path, os.W_OK | os.X_OK) else "the folder is not writable"
    base = _nearest_existing(path)
    if not os.path.isdir(base):
        return f"{base} is a file, not a folder"
    if not os.access(base, os.W_OK | os.X_OK):
        return f"cannot create it: {base} is not writable"
    return None


def output_file(ctx: click.Context, param: click.Parameter, value: Any) -> Any:
    """Click callback of an output-file option: refuse an unwritable path at once (exit 2,
    the path named) rather than after the run."""
    if value:
        why = check_output_file(value)
        if why:
            raise click.BadParameter(f"cannot write {value}: {why}", ctx=ctx, param=param)
    return value


def output_dir(ctx: click.Context, param: click.Parameter, value: Any) -> Any:
    """Click callback of an output-folder option (as :func:`output_file`)."""
    if value:
        why = check_output_dir(value)
        if why:
            raise click.BadParameter(f"cannot write to {value}: {why}", ctx=ctx, param=param)
    return value


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
        click.option("--json", "json_path", type=click.Path(dir_okay=False), default=None, callback=output_file,
                     help="Write every case to this JSON file."),
        click.option("--junit", "junit_path", type=click.Path(dir_okay=False), default=None, callback=output_file,
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
    """Write the JSON and JUnit files a command was asked for, each atomically (a temporary
    file in the same folder, then renamed: never a partial file), and say so. A path that
    became unwritable during the run is an error naming it (exit 2)."""
    from .report.jsonfile import write_json
    from .report.junit import write_junit

    for path, write in ((json_path, lambda p: write_json(p, result, command)),
                        (junit_path, lambda p: write_junit(p, result, command, reproduce))):
        if not path:
            continue
        try:
            write(path)
        except OSError as exc:
            raise InputFailure(f"cannot write {path}: {exc.strerror or exc}") from exc
        click.echo(f"wrote {path}")
