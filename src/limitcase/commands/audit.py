"""``limitcase audit [MODEL]...``: the engine's own checks, model by model.

Thin: parses, calls :func:`limitcase.audits.run_audits`, renders with
:mod:`limitcase.report.audit` (the table and the legend of its non-price rows). Exit status as
``check``: 0 when every audit passes, 1 when any fails or errors, 2 for bad input (an unknown
model, a model file that does not import, a bad override).
"""

from __future__ import annotations

import sys

import click

from ..cli_support import EXIT_FAIL, EXIT_OK, InputFailure, Progress, common_run_options, handle_errors, write_outputs
from ..settings import reproduce_command


def _audit_names() -> tuple[str, ...]:
    from ..audits import AUDITS

    return AUDITS


def _chosen_models(specs: tuple[str, ...], failures: list) -> dict:
    """Models by name from the specs (shipped names with overrides, files, folders,
    ``file.py:Class``; see :mod:`limitcase.models.spec`); a name taken twice gets its file.
    A file in a folder that does not import goes to ``failures``; the rest are audited."""
    from ..loader import qualified_names
    from ..models.spec import resolve_models

    found = [m for s in specs for m in resolve_models(s, failures=failures)]
    names = qualified_names([type(m) for m in found])
    chosen: dict = {}
    for m in found:
        key = names[type(m)]
        if key in chosen:
            key = f"{key} {m.label()}"
        chosen[key] = m
    return chosen


@click.command("audit")
@click.argument("model_names", metavar="[MODEL]...", nargs=-1)
@common_run_options
@click.option("--only", "only", multiple=True, type=click.Choice(_audit_names()),
              help="Run only this audit (repeatable; default: all).")
@click.option("--select", "selects", multiple=True, metavar="TEXT",
              help="Keep only the outcomes whose 'model/case' contains TEXT (repeatable).")
@click.option("--drift-correction", is_flag=True,
              help="Also report the martingale test on paths rescaled to the forward "
                   "(the uncorrected test always runs and decides).")
@handle_errors
def command(model_names: tuple[str, ...], paths: int, seed: int, alpha: float, json_path: str | None,
            junit_path: str | None, debug: bool, only: tuple[str, ...], selects: tuple[str, ...],
            drift_correction: bool) -> None:
    """Audit the simulation of each MODEL (default: every shipped model at its default
    parameters). MODEL is a shipped name with optional overrides (heston:kappa=2,theta=0.04),
    a .py file or folder of Model classes, or file.py:Class[:name=value,...]: martingale, standard error against paths, seed-to-seed spread, time-step
    convergence and the model's degenerate cases."""
    from ..audits import AUDITS, default_models, run_audits
    from ..report import render_summary, render_table
    from ..report.audit import render_audit_legend

    failures: list = []
    models = _chosen_models(model_names, failures) or ({} if failures else default_models())
    audits = tuple(a for a in AUDITS if a in only) if only else AUDITS
    progress = Progress("auditing", len(models))
    try:
        result = run_audits(models, audits, paths=paths, seed=seed, alpha=alpha,
                            drift_correction=drift_correction, select=selects, progress=progress)
    finally:
        progress.close()
    from ..verdict import Outcome

    result.outcomes.extend(Outcome(product=str(f.path), case="import", kind="load", verdict="error",
                                   message=f.message) for f in failures)
    if not result.outcomes:
        raise InputFailure("no audit outcomes" + (" match --select" if selects else ""))
    click.echo(render_table(result.outcomes))
    legend = render_audit_legend(result.outcomes)
    if legend:
        click.echo(legend)
    click.echo("")
    reproduce = reproduce_command("audit", model_names, seed=None, paths=None, alpha=alpha)
    click.echo(render_summary(result, reproduce=reproduce))
    times = result.extra.get("timings", {})
    if times:
        click.echo("seconds: " + ", ".join(f"{m} {sum(t.values()):.1f}" for m, t in times.items()))
    write_outputs(result, "audit", json_path, junit_path, reproduce)
    sys.exit(EXIT_OK if result.ok else EXIT_FAIL)
