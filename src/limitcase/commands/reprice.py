"""``limitcase reprice QUOTES.csv``: calibrate a model to vanilla quotes, then reprice every
quote by Monte Carlo under the calibrated model and say which it fails to price back.

Parsing only; the work is in :mod:`limitcase.quotes` and :mod:`limitcase.calibrate`, the
rendering in :mod:`limitcase.report.reprice`. Exit status as ``check``: 0 every quote passes, 1 any fails or
errors, 2 bad input (a malformed quote or market file, a missing market value).
"""

from __future__ import annotations

import sys
import time
from pathlib import Path
from typing import Sequence

import click

from ..calibrate import (
    DEFAULT_STARTS,
    DEFAULT_STEPS_PER_YEAR,
    DEFAULT_TOLERANCE_VOL,
    MODELS,
    WEIGHTINGS,
    calibrate,
    reprice,
)
from ..settings import REPRICE_LOCALVOL_STEPS_PER_YEAR, reproduce_command
from ..cli_support import EXIT_FAIL, EXIT_OK, Progress, common_run_options, handle_errors, write_outputs
from ..quotes import check_quote_file, describe, load_quotes, resolve_market
from ..report.reprice import (
    plot_smiles,
    render_calibration,
    render_quotes_header,
    render_reprice_summary,
    render_reprice_table,
)

__all__ = ["command", "render_calibration", "render_reprice_table", "render_reprice_summary", "plot_smiles"]

_OMIT_FROM_REPRODUCE = {"quotes_path", "paths", "seed", "json_path", "junit_path", "plot_dir", "debug", "selects"}


def _reproduce(ctx: click.Context, quotes_path: str) -> str:
    parts = [reproduce_command("reprice", [quotes_path], seed=None, paths=None)]
    for p in ctx.command.params:
        if p.name in _OMIT_FROM_REPRODUCE or not isinstance(p, click.Option):
            continue
        value = ctx.params.get(p.name)
        if value is None or value == p.default:
            continue
        flag = p.opts[-1] if p.opts[-1].startswith("--") else p.opts[0]
        parts.append(f"{flag} {value!s}" if " " not in str(value) else f"{flag} '{value}'")
    return " ".join(parts)


@click.command("reprice")
@click.argument("quotes_path", metavar="QUOTES.csv", type=click.Path())
@click.option("--market", "market_path", type=click.Path(dir_okay=False), default=None,
              help="Market file of 'key = value' lines (spot, rate, dividend, valuation_date); "
                   "default: QUOTES with the suffix .market, when it exists.")
@click.option("--spot", type=str, default=None, help="Spot price (overrides the market file).")
@click.option("--rate", type=str, default=None,
              help="Zero rate, continuously compounded: one decimal (0.03) or a table '0.5:0.03 1:0.032'.")
@click.option("--dividend", type=str, default=None, help="Continuous dividend yield: one decimal or a table.")
@click.option("--valuation-date", type=str, default=None,
              help="Valuation date (YYYY-MM-DD); needed when expiries are dates.")
@click.option("--model", type=click.Choice(list(MODELS)), default="heston", show_default=True,
              help="Model to calibrate and simulate.")
@click.option("--weighting", type=click.Choice(list(WEIGHTINGS)), default="vega", show_default=True,
              help="Residuals: price error over vega (about the implied-vol error) or over the bid-ask spread.")
@click.option("--starts", type=click.IntRange(1, 64), default=DEFAULT_STARTS, show_default=True,
              help="Starting points of the Heston fit (the best is kept).")
@click.option("--scheme", type=click.Choice(["qe", "euler"]), default="qe", show_default=True,
              help="Heston simulation scheme.")
@click.option("--steps-per-year", type=click.IntRange(1, 100_000), default=None,
              help=f"Simulation steps per year [default: {DEFAULT_STEPS_PER_YEAR} for Heston's scheme, "
                   f"{REPRICE_LOCALVOL_STEPS_PER_YEAR} for local volatility's log-Euler].")
@click.option("--tolerance", type=click.FloatRange(0.0, 100.0), default=DEFAULT_TOLERANCE_VOL, show_default=True,
              help="Band, in implied-vol points around the market price, of quotes without bid-ask.")
@click.option("--select", "selects", multiple=True, metavar="TEXT",
              help="Reprice only quotes whose 'model/label' contains TEXT (repeatable); the fit uses all.")
@click.option("--plot", "plot_dir", type=click.Path(file_okay=False), default=None,
              help="Write one PNG of the smile per expiry to this folder.")
@common_run_options
@handle_errors
def command(quotes_path: str, market_path: str | None, spot: str | None, rate: str | None, dividend: str | None,
            valuation_date: str | None, model: str, weighting: str, starts: int, scheme: str, steps_per_year: int,
            tolerance: float, selects: Sequence[str], plot_dir: str | None, paths: int, seed: int, alpha: float,
            json_path: str | None, junit_path: str | None, debug: bool) -> None:
    """Calibrate MODEL to the vanilla quotes in QUOTES.csv, then reprice every quote by
    Monte Carlo under the calibrated model: each must fall within its bid-ask (widened by
    its statistical error) and agree with the model's own formula price."""
    ctx = click.get_current_context()
    check_quote_file(quotes_path)  # a missing or oversized quote file is named before the market is read
    if market_path is None:
        guess = Path(quotes_path).with_suffix(".market")
        market_path = str(guess) if guess.is_file() else None
    market = resolve_market(market_file=market_path, spot=spot, rate=rate, dividend=dividend,
                            valuation_date=valuation_date)
    qs = load_quotes(quotes_path, market)
    click.echo(render_quotes_header(describe(qs)))
    for w in qs.warnings:
        click.echo(f"warning: {w.message}", err=True)
    t0 = time.monotonic()
    cal = calibrate(qs, model, weighting=weighting, starts=starts)
    t1 = time.monotonic()
    click.echo(render_calibration(cal.summary()))
    progress = Progress("repricing", len(qs.expiries()))
    try:
        if steps_per_year is None:
            steps_per_year = REPRICE_LOCALVOL_STEPS_PER_YEAR if model == "local-vol" else DEFAULT_STEPS_PER_YEAR
        rep = reprice(cal, paths=paths, seed=seed, alpha=alpha, scheme=scheme, steps_per_year=steps_per_year,
                      tolerance_vol=tolerance, select=selects, progress=progress)
    finally:
        progress.close()
    t2 = time.monotonic()
    rep.result.extra["timing_seconds"] = {"calibrate": round(t1 - t0, 3), "reprice": round(t2 - t1, 3)}
    click.echo("")
    click.echo(render_reprice_table([r.to_dict() for r in rep.rows]))
    click.echo("")
    reproduce = _reproduce(ctx, quotes_path)
    click.echo(render_reprice_summary(rep.result, model=cal.model, scheme=rep.scheme,
                                      steps_per_year=rep.steps_per_year, tolerance_vol=rep.tolerance_vol,
                                      reproduce=reproduce))
    click.echo(f"calibrated in {t1 - t0:.1f} s, repriced in {t2 - t1:.1f} s")
    write_outputs(rep.result, "reprice", json_path, junit_path, reproduce)
    if plot_dir:
        for p in plot_smiles(rep.smiles(), plot_dir, source=qs.path, model=cal.name):
            click.echo(f"wrote {p}")
    sys.exit(EXIT_OK if rep.result.ok else EXIT_FAIL)
