"""Start-up of the ``limitcase`` command.

A module of its own, outside the :mod:`limitcase` package, so that importing it imports
nothing else: the library (numpy, scipy, sympy, the commands) is imported inside
:func:`run`, where a Ctrl-C while it loads ends the command with one line and exit status
130 (128 + SIGINT, as shells report an interrupted command) instead of Python's traceback.
A Ctrl-C later, during a run, ends the same way.
"""

from __future__ import annotations

import sys

__all__ = ["EXIT_INTERRUPTED", "run"]

EXIT_INTERRUPTED = 130


def _interrupted() -> None:
    sys.stderr.write("\nlimitcase: interrupted\n")
    sys.stderr.flush()
    sys.exit(EXIT_INTERRUPTED)


def run() -> None:
    """Entry point of the ``limitcase`` console script."""
    try:
        import click

        from limitcase.cli import main
    except KeyboardInterrupt:
        _interrupted()
        return
    try:
        code = main.main(prog_name="limitcase", standalone_mode=False)
    except (KeyboardInterrupt, click.exceptions.Abort):
        _interrupted()
        return
    except click.ClickException as exc:
        exc.show()
        sys.exit(exc.exit_code)
    sys.exit(code if isinstance(code, int) else 0)


if __name__ == "__main__":  # pragma: no cover
    run()
