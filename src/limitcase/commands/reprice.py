"""``limitcase reprice QUOTES.csv``: calibrate a model to vanilla quotes, then reprice every
quote by Monte Carlo under the calibrated model and say which it fails to price back.

Parsing and rendering only; the work is in :mod:`limitcase.quotes` and
:mod:`limitcase.calibrate`. Exit status as ``check``: 0 every quote passes, 1 any fails or
errors, 2 bad input (a malformed quote or market file, a missing market value).
"""

from __future__ import annotations

import math
import sys
import time
from pathlib import Path
from typing import Any, Sequence

import click

from ..calibrate import (
    DEFAULT_STARTS,
    DEFAULT_STEPS_PER_YEAR,
    DEFAULT_TOLERANCE_VOL,
    MODELS,
    WEIGHTINGS,
    Calibration,
    Repricing,
    calibrate,
    reprice,
)
from ..cli_support import EXIT_FAIL, EXIT_OK, Progress, common_run_options, handle_errors, write_outputs
from ..quotes import QuoteSet, load_quotes, resolve_market

__all__ = ["command", "render_calibration", "render_reprice_table", "render_reprice_summary", "plot_smiles"]

_OMIT_FROM_REPRODUCE = {"quotes_path", "paths", "seed", "json_path", "junit_path", "plot_dir", "debug", "selects"}


def _num(x: float | None, digits: int = 5) -> str:
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "-"
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    return f"{x:.{digits}g}"


def _fixed(x: float | None, places: int = 2, sign: bool = False) -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "-"
    return f"{x:+.{places}f}" if sign else f"{x:.{places}f}"


def render_quotes_header(qs: QuoteSet) -> str:
    m = qs.market
    vd = f", valuation date {m.valuation_date.isoformat()}" if m.valuation_date else ""
    return (f"{qs.path}: {len(qs)} quotes ({qs.quoted}), {len(qs.expiries())} expiries; "
            f"spot {m.spot:g}, rate {m.rate.text()}, dividend {m.dividend.text()}{vd} ({m.source})")


def render_calibration(cal: Calibration) -> str:
    """The fitted parameters with standard errors, the fit errors, Feller, notes."""
    lines = [f"{cal.name} calibration ({cal.weighting}-weighted, {cal.starts} start{'s' if cal.starts > 1 else ''}, "
             f"{cal.nfev} evaluations):"]
    width = max(len(n) for n in cal.params)
    for n, v in cal.params.items():
        se = cal.stderr.get(n)
        flag = "  (at a bound)" if n in cal.at_bound else ""
        lines.append(f"  {n.ljust(width)} = {v:.6g}" + (f" +/- {se:.2g}" if se is not None else "") + flag)
    inside, of = cal.within_spread
    spread = (f"formula price within bid-ask for {inside} of {of} quotes" if of
              else "no bid-ask given")
    lines.append(f"  fit: RMSE {cal.rmse_price:.4g} in price, {cal.rmse_vol:.3g} vol points "
                 f"(largest {cal.max_vol_error:.3g}); {spread}")
    if cal.feller is not None and cal.feller_sides is not None:
        a, b = cal.feller_sides
        lines.append(f"  Feller 2 kappa theta >= vol_of_vol^2: {a:.4g} {'>=' if cal.feller else '<'} {b:.4g} "
                     f"({'holds' if cal.feller else 'fails: the variance can reach zero'})")
    for note in cal.notes:
        lines.append(f"  note: {note}")
    return "\n".join(lines)


_HEAD = ("quote", "market", "bid-ask", "formula", "MC +/- SE", "MC-mkt", "vol pts", "spreads", "z band",
         "z formula", "verdict")


def render_reprice_table(rep: Repricing) -> str:
    """One row per quote: market, formula, Monte Carlo, the differences and both tests."""
    rows = [_HEAD]
    for r in rep.rows:
        q = r.quote
        spread = f"[{_num(q.bid, 6)}, {_num(q.ask, 6)}]" if q.has_spread else f"~[{_num(r.band[0], 5)}, {_num(r.band[1], 5)}]"
        if r.mc is None:
            rows.append((q.label, _num(q.price, 6), spread, _num(r.formula, 6), "-", "-", "-", "-", "-", "-", "ERROR"))
            continue
        rows.append((
            q.label, _num(q.price, 6), spread, _num(r.formula, 6), f"{_num(r.mc, 6)} +/- {_num(r.mc_se, 2)}",
            _num(r.diff_price, 3), _fixed(r.diff_vol, 2, sign=True), _fixed(r.diff_spreads, 2, sign=True),
            _fixed(r.z_band, 2), _fixed(r.z_formula, 2, sign=True), r.verdict.upper(),
        ))
    widths = [max(len(row[i]) for row in rows) for i in range(len(_HEAD))]
    out = []
    for k, row in enumerate(rows):
        out.append("  ".join(c.ljust(w) if i == 0 else c.rjust(w) for i, (c, w) in enumerate(zip(row, widths))).rstrip())
        if k == 0:
            out.append("  ".join("-" * w for w in widths))
    return "\n".join(out)


def render_reprice_summary(rep: Repricing, reproduce: str) -> str:
    """Counts, how to read the table, and each failure with the command reproducing it."""
    res = rep.result
    s = res.summary
    sim = "exact" if rep.calibration.model != "heston" else f"{rep.scheme.upper()} scheme, {rep.steps_per_year} steps a year"
    lines = [
        f"{s['total']} quote{'' if s['total'] == 1 else 's'}: {s['pass']} pass, {s['fail']} fail, {s['error']} error "
        f"(paths {res.paths} per expiry, seed {res.seed}, {sim}; family-wise false-alarm rate {res.alpha:g}, Holm)",
        "  formula: " + ("the Heston characteristic-function price (Lewis integral)" if rep.calibration.model == "heston"
                         else "the Black-Scholes closed form") + " at the fitted parameters; vol pts: MC minus "
        "market implied vol; spreads: (MC - market) / (ask - bid)",
        "  z band: how far MC lies outside the band (bid-ask, or ~[...] = market price +/- "
        f"{rep.tolerance_vol:g} vol points when no bid-ask), in SE; z formula: (MC - formula)/SE",
    ]
    for r, o in zip(rep.rows, res.outcomes):
        if o.verdict == "pass":
            continue
        lines.append(f"{o.verdict.upper()} {o.product}/{o.case}: {o.message}")
        if o.verdict == "fail":
            lines.append(f"  reproduce: {reproduce} --seed {res.seed} --paths {res.paths} --select '{o.product}/{o.case}'")
    return "\n".join(lines)


def plot_smiles(rep: Repricing, directory: str | Path, z: float = 2.0) -> list[Path]:
    """One PNG per expiry: market implied vols (bars: bid to ask), the calibrated model's
    smile by formula, and the Monte Carlo prices' implied vols (bars: +/- z SE)."""
    import numpy as np
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from ..references import implied_vol

    cal = rep.calibration
    qs = cal.quotes
    m = qs.market
    out_dir = Path(directory)
    out_dir.mkdir(parents=True, exist_ok=True)
    by_t: dict[float, list[Any]] = {}
    for r in rep.rows:
        by_t.setdefault(r.quote.expiry, []).append(r)
    written = []
    for n, (t, rows) in enumerate(sorted(by_t.items()), start=1):
        fig = Figure(figsize=(7.5, 4.8))
        FigureCanvasAgg(fig)
        ax = fig.add_subplot(1, 1, 1)
        ks = np.array([r.quote.strike for r in rows])
        f = m.forward(t)
        grid = np.linspace(ks.min() * 0.97, ks.max() * 1.03, 80)
        curve = []
        for kind, mask in (("put", grid < f), ("call", grid >= f)):
            if mask.any():
                prices = cal.formula(t, grid[mask], kind)
                for k, p in zip(grid[mask], prices):
                    try:
                        curve.append((k, 100 * float(implied_vol(float(p), m.spot, k, t, m.rate(t), m.dividend(t), kind))))
                    except Exception:  # a formula price at a bound has no implied vol: leave a gap
                        pass
        if curve:
            cx, cy = zip(*sorted(curve))
            ax.plot(cx, cy, "-", color="tab:blue", label=f"{cal.name} (formula)")
        mk = [(r.quote.strike, 100 * r.quote.iv, r) for r in rows if r.quote.iv is not None]
        if mk:
            x = [a for a, _, _ in mk]
            y = [b for _, b, _ in mk]
            lo = [b - 100 * r.quote.bid_iv if r.quote.bid_iv is not None else 0.0 for _, b, r in mk]
            hi = [100 * r.quote.ask_iv - b if r.quote.ask_iv is not None else 0.0 for _, b, r in mk]
            ax.errorbar(x, y, yerr=[lo, hi], fmt="o", color="black", ms=4, capsize=3, label="market (bid to ask)")
        mc = [(r.quote.strike, 100 * r.mc_iv, 100 * z * (r.mc_iv_se or 0.0), r.verdict) for r in rows if r.mc_iv is not None]
        if mc:
            shift = 0.004 * (ks.max() - ks.min())  # beside the market point, not on it
            ax.errorbar([a + shift for a, *_ in mc], [b for _, b, *_ in mc], yerr=[c for *_, c, _ in mc], fmt="s",
                        color="tab:orange", ms=4, capsize=3, label=f"Monte Carlo (+/- {z:g} SE)")
            bad = [(a + shift, b) for a, b, _, v in mc if v != "pass"]
            if bad:
                ax.plot(*zip(*bad), "x", color="red", ms=10, mew=2, label="failed")
        ax.axvline(f, color="grey", lw=0.8, ls=":")
        ax.set_xlabel("strike (dotted: forward)")
        ax.set_ylabel("implied volatility (%)")
        ax.set_title(f"{Path(qs.path).name}: T={rows[0].quote.expiry_text} ({t:.3f} y), {cal.name}")
        ax.grid(alpha=0.3)
        ax.legend(fontsize=8)
        fig.tight_layout()
        safe = "".join(ch if ch.isalnum() or ch in "-._" else "_" for ch in rows[0].quote.expiry_text)
        path = out_dir / f"smile_{n:02d}_T{safe}.png"
        fig.savefig(path, dpi=110)
        written.append(path)
    return written


def _reproduce(ctx: click.Context, quotes_path: str) -> str:
    parts = ["limitcase reprice", quotes_path]
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
@click.option("--steps-per-year", type=click.IntRange(1, 100_000), default=DEFAULT_STEPS_PER_YEAR,
              show_default=True, help="Heston scheme steps per year.")
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
    if market_path is None:
        guess = Path(quotes_path).with_suffix(".market")
        market_path = str(guess) if guess.is_file() else None
    market = resolve_market(market_file=market_path, spot=spot, rate=rate, dividend=dividend,
                            valuation_date=valuation_date)
    qs = load_quotes(quotes_path, market)
    click.echo(render_quotes_header(qs))
    for w in qs.warnings:
        click.echo(f"warning: {w.message}", err=True)
    t0 = time.monotonic()
    cal = calibrate(qs, model, weighting=weighting, starts=starts)
    t1 = time.monotonic()
    click.echo(render_calibration(cal))
    progress = Progress("repricing", len(qs.expiries()))
    try:
        rep = reprice(cal, paths=paths, seed=seed, alpha=alpha, scheme=scheme, steps_per_year=steps_per_year,
                      tolerance_vol=tolerance, select=selects, progress=progress)
    finally:
        progress.close()
    t2 = time.monotonic()
    rep.result.extra["timing_seconds"] = {"calibrate": round(t1 - t0, 3), "reprice": round(t2 - t1, 3)}
    click.echo("")
    click.echo(render_reprice_table(rep))
    click.echo("")
    reproduce = _reproduce(ctx, quotes_path)
    click.echo(render_reprice_summary(rep, reproduce))
    click.echo(f"calibrated in {t1 - t0:.1f} s, repriced in {t2 - t1:.1f} s")
    write_outputs(rep.result, "reprice", json_path, junit_path, reproduce)
    if plot_dir:
        for p in plot_smiles(rep, plot_dir):
            click.echo(f"wrote {p}")
    sys.exit(EXIT_OK if rep.result.ok else EXIT_FAIL)
