"""Rendering of ``limitcase reprice``: the quote set's header, the calibration, the repricing
table and summary, and one smile plot per expiry.

Everything here formats plain records that the library built (dicts of numbers and text:
:func:`limitcase.quotes.describe`, ``Calibration.summary()``, ``RepriceRow.to_dict()``,
``Repricing.smiles()``); nothing here prices, so this module imports nothing that does.
"""

from __future__ import annotations

import math
from ..settings import reproduce_check
from pathlib import Path
from typing import Any, Mapping, Sequence

__all__ = [
    "render_quotes_header",
    "render_calibration",
    "render_reprice_table",
    "render_reprice_summary",
    "plot_smiles",
]


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


def render_quotes_header(quotes: Mapping[str, Any]) -> str:
    """One line: the file, its quotes and expiries, and the market (``describe(qs)``)."""
    m = quotes["market"]
    vd = f", valuation date {m['valuation_date']}" if m.get("valuation_date") else ""
    return (f"{quotes['file']}: {quotes['quotes']} quotes ({quotes['quoted']}), {len(quotes['expiries'])} expiries; "
            f"spot {m['spot']:g}, rate {m['rate']}, dividend {m['dividend']}{vd} ({m['source']})")


def render_calibration(cal: Mapping[str, Any]) -> str:
    """The fitted parameters with standard errors, the fit errors, Feller, notes
    (``Calibration.summary()``)."""
    starts = cal["starts"]
    lines = [f"{cal['model']} calibration ({cal['weighting']}-weighted, {starts} start{'s' if starts > 1 else ''}, "
             f"{cal['evaluations']} evaluations):"]
    params = cal["parameters"]
    width = max(len(n) for n in params)
    for n, v in params.items():
        se = cal["stderr"].get(n)
        flag = "  (at a bound)" if n in cal["at_bound"] else ""
        lines.append(f"  {n.ljust(width)} = {v:.6g}" + (f" +/- {se:.2g}" if se is not None else "") + flag)
    inside, of = cal["within_bid_ask"]["count"], cal["within_bid_ask"]["of"]
    spread = f"formula price within bid-ask for {inside} of {of} quotes" if of else "no bid-ask given"
    lines.append(f"  fit: RMSE {_num(cal['rmse_price'], 4)} in price, {_num(cal['rmse_vol_points'], 3)} vol points "
                 f"(largest {_num(cal['max_vol_error_points'], 3)}); {spread}")
    feller = cal.get("feller")
    if feller is not None:
        a, b, holds = feller["two_kappa_theta"], feller["vol_of_vol_squared"], feller["holds"]
        lines.append(f"  Feller 2 kappa theta >= vol_of_vol^2: {a:.4g} {'>=' if holds else '<'} {b:.4g} "
                     f"({'holds' if holds else 'fails: the variance can reach zero'})")
    for note in cal["notes"]:
        lines.append(f"  note: {note}")
    return "\n".join(lines)


_HEAD = ("quote", "market", "bid-ask", "formula", "MC +/- SE", "MC-mkt", "vol pts", "spreads", "z band",
         "z formula", "verdict")


def render_reprice_table(rows: Sequence[Mapping[str, Any]]) -> str:
    """One row per quote (``RepriceRow.to_dict()``): market, formula, Monte Carlo, the
    differences and both tests."""
    out_rows = [_HEAD]
    for r in rows:
        if r["bid"] is not None and r["ask"] is not None:
            spread = f"[{_num(r['bid'], 6)}, {_num(r['ask'], 6)}]"
        else:
            spread = f"~[{_num(r['band'][0], 5)}, {_num(r['band'][1], 5)}]"
        if r["mc"] is None:
            out_rows.append((r["case"], _num(r["market"], 6), spread, _num(r["formula"], 6), "-", "-", "-", "-", "-",
                             "-", "ERROR"))
            continue
        out_rows.append((
            r["case"], _num(r["market"], 6), spread, _num(r["formula"], 6),
            f"{_num(r['mc'], 6)} +/- {_num(r['mc_stderr'], 2)}", _num(r["diff_price"], 3),
            _fixed(r["diff_vol_points"], 2, sign=True), _fixed(r["diff_spreads"], 2, sign=True),
            _fixed(r["z_band"], 2), _fixed(r["z_formula"], 2, sign=True), str(r["verdict"]).upper(),
        ))
    widths = [max(len(row[i]) for row in out_rows) for i in range(len(_HEAD))]
    out = []
    for k, row in enumerate(out_rows):
        out.append("  ".join(c.ljust(w) if i == 0 else c.rjust(w) for i, (c, w) in enumerate(zip(row, widths))).rstrip())
        if k == 0:
            out.append("  ".join("-" * w for w in widths))
    return "\n".join(out)


_FORMULA = {
    "heston": "the Heston characteristic-function price (Lewis integral)",
    "local-vol": "the SVI surface's own price (what Dupire's local volatility reprices in the limit of small steps)",
    "black-scholes": "the Black-Scholes closed form",
}


def render_reprice_summary(result: Any, *, model: str, scheme: str, steps_per_year: int, tolerance_vol: float,
                           reproduce: str) -> str:
    """Counts, how to read the table, and each failure with the command reproducing it.

    ``result`` is the run's record (``summary`` counts, ``paths``, ``seed``, ``alpha`` and
    ``outcomes`` with ``verdict``, ``product``, ``case``, ``message``)."""
    s = result.summary
    sim = f"{scheme.upper()} scheme, {steps_per_year} steps a year" if model in ("heston", "local-vol") else "exact"
    lines = [
        f"{s['total']} quote{'' if s['total'] == 1 else 's'}: {s['pass']} pass, {s['fail']} fail, {s['error']} error "
        f"(paths {result.paths} per expiry, seed {result.seed}, {sim}; family-wise false-alarm rate "
        f"{result.alpha:g}, Holm)",
        "  formula: " + _FORMULA.get(model, _FORMULA["black-scholes"]) + " at the fitted parameters; vol pts: MC minus "
        "market implied vol; spreads: (MC - market) / (ask - bid)",
        "  z band: how far MC lies outside the band (bid-ask, or ~[...] = market price +/- "
        f"{tolerance_vol:g} vol points when no bid-ask), in SE; z formula: (MC - formula)/SE",
    ]
    for o in result.outcomes:
        if o.verdict == "pass":
            continue
        lines.append(f"{o.verdict.upper()} {o.product}/{o.case}: {o.message}")
        if o.verdict == "fail":
            lines.append("  reproduce: " + reproduce_check(reproduce, seed=result.seed, paths=result.paths,
                                                           select=f"{o.product}/{o.case}"))
    return "\n".join(lines)


def plot_smiles(smiles: Sequence[Mapping[str, Any]], directory: str | Path, *, source: str, model: str,
                z: float = 2.0) -> list[Path]:
    """One PNG per expiry (``Repricing.smiles(z)``): market implied vols (bars: bid to ask),
    the calibrated model's smile by formula, and the Monte Carlo prices' implied vols (bars:
    +/- z SE); ``source`` names the quote file in the titles."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    out_dir = Path(directory)
    out_dir.mkdir(parents=True, exist_ok=True)
    written = []
    for n, sm in enumerate(smiles, start=1):
        fig = Figure(figsize=(7.5, 4.8))
        FigureCanvasAgg(fig)
        ax = fig.add_subplot(1, 1, 1)
        if sm["curve"]:
            cx, cy = zip(*sm["curve"])
            ax.plot(cx, cy, "-", color="tab:blue", label=f"{model} (formula)")
        mk = sm["market"]
        if mk:
            ax.errorbar([p["strike"] for p in mk], [p["iv"] for p in mk],
                        yerr=[[p["below"] for p in mk], [p["above"] for p in mk]], fmt="o", color="black", ms=4,
                        capsize=3, label="market (bid to ask)")
        mc = sm["mc"]
        if mc:
            ax.errorbar([p["strike"] for p in mc], [p["iv"] for p in mc], yerr=[p["bar"] for p in mc], fmt="s",
                        color="tab:orange", ms=4, capsize=3, label=f"Monte Carlo (+/- {z:g} SE)")
            bad = [(p["strike"], p["iv"]) for p in mc if p["verdict"] != "pass"]
            if bad:
                ax.plot(*zip(*bad), "x", color="red", ms=10, mew=2, label="failed")
        ax.axvline(sm["forward"], color="grey", lw=0.8, ls=":")
        ax.set_xlabel("strike (dotted: forward)")
        ax.set_ylabel("implied volatility (%)")
        ax.set_title(f"{Path(source).name}: T={sm['expiry_text']} ({sm['expiry']:.3f} y), {model}")
        ax.grid(alpha=0.3)
        ax.legend(fontsize=8)
        fig.tight_layout()
        safe = "".join(ch if ch.isalnum() or ch in "-._" else "_" for ch in sm["expiry_text"])
        path = out_dir / f"smile_{n:02d}_T{safe}.png"
        fig.savefig(path, dpi=110)
        written.append(path)
    return written
