"""``limitcase audit [MODEL]...``: the engine's own checks, model by model.

Thin: parses, calls :func:`limitcase.audits.run_audits`, renders with
:mod:`limitcase.report.audit` (the table and the legend of its non-price rows). Exit status as ``check``:
0 when every audit passes, 1 when any fails or errors, 2 for bad input (an unknown model).
"""

from __future__ import annotations

import sys

import click

from ..cli_support import EXIT_FAIL, EXIT_OK, InputFailure, Progress, common_run_options, handle_errors, write_outputs


def _audit_names() -> tuple[str, ...]:
    from ..audits import AUDITS

    return AUDITS


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
    parameters): martingale, standard error against paths, seed-to-seed spread, time-step
    convergence and the model's degenerate cases."""
    from ..audits import AUDITS, default_models, run_audits
    from ..report import render_summary, render_table
    from ..report.audit import render_audit_legend

    known = default_models()
    by_lower = {k.lower(): k for k in known}
    chosen = {}
    for name in model_names:
        key = by_lower.get(name.lower())
        if key is None:
            raise InputFailure(f"unknown model {name!r}; the models are: {', '.join(known)}")
        chosen[key] = known[key]
    models = chosen or known
    audits = tuple(a for a in AUDITS if a in only) if only else AUDITS
    progress = Progress("auditing", len(models))
    try:
        result = run_audits(models, audits, paths=paths, seed=seed, alpha=alpha,
                            drift_correction=drift_correction, select=selects, progress=progress)
    finally:
        progress.close()
    if not result.outcomes:
        raise InputFailure("no audit outcomes" + (" match --select" if selects else ""))
    click.echo(render_table(result.outcomes))
    legend = render_audit_legend(result.outcomes)
    if legend:
        click.echo(legend)
    click.echo("")
    reproduce = f"limitcase audit {' '.join(model_names)}".rstrip()
    click.echo(render_summary(result, reproduce=reproduce))
    times = result.extra.get("timings", {})
    click.echo("seconds: " + ", ".join(f"{m} {sum(t.values()):.1f}" for m, t in times.items()))
    write_outputs(result, "audit", json_path, junit_path, reproduce)
    sys.exit(EXIT_OK if result.ok else EXIT_FAIL)
