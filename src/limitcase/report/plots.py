"""Pictures for the dossier, drawn with matplotlib's Agg canvas (no display, no pyplot
state) and returned as PNG bytes, so a page can embed them or write them beside itself.

* :func:`sweep_png`: the Monte Carlo price at each point of a sweep toward a limit, with
  its 95% confidence band, and the base case's trusted value as a horizontal line.
* :func:`convergence_png`: standard error against paths on log-log axes, with the
  ``n^{-1/2}`` line through the largest run, and the estimate with its band against paths.
* :func:`steps_png`: the estimate against a model's number of time steps.
* :func:`formula_png`: a LaTeX formula typeset by matplotlib's mathtext (offline).
"""

from __future__ import annotations

import io
import math
from typing import TYPE_CHECKING

from matplotlib import mathtext
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.font_manager import FontProperties
from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter, NullLocator

from .numbers import count, tick

if TYPE_CHECKING:  # pragma: no cover
    from ..document.records import ConvergenceSeries, StepSeries, SweepSeries

__all__ = ["sweep_png", "sweep_style", "convergence_png", "steps_png", "formula_png", "path_labels", "Z95"]

Z95 = 1.959963984540054
"""Two-sided 95% normal quantile: the bands drawn are value +/- Z95 * stderr."""

_BLUE, _ORANGE, _GREY, _GREEN = "#1f5fa8", "#d9731a", "#666666", "#2e8b57"


def _png(fig: Figure) -> bytes:
    FigureCanvasAgg(fig)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=100)
    return buf.getvalue()


_PLAIN = FuncFormatter(lambda v, _: f"{v:g}")


def _plain_log_y(ax) -> None:
    # plain numbers instead of mathtext powers of ten: readable, and far cheaper to draw
    ax.yaxis.set_major_locator(LogLocator(base=10.0, subs=(1.0, 2.0, 5.0)))
    ax.yaxis.set_major_formatter(_PLAIN)
    ax.yaxis.set_minor_locator(NullLocator())
    ax.yaxis.set_minor_formatter(NullFormatter())


def path_labels(n: list[int]) -> list[str]:
    """Tick labels of path counts: digits grouped by thin spaces (16 384), never by a comma
    or a point, which read as a decimal sign in half the world."""
    return [count(k) for k in n]


def _path_axis(ax, n: list[int]) -> None:
    ax.set_xscale("log")
    ax.set_xticks(n)
    ax.set_xticklabels(path_labels(n), rotation=30, fontsize=8)
    ax.xaxis.set_minor_locator(NullLocator())
    ax.set_xlabel("paths")


_tick = tick


def sweep_png(sweep: "SweepSeries", title: str | None = None) -> bytes:
    """The sweep of one reduction: estimates with 95% bands, the limit point, the base value.

    A parameter that takes whole values only (a count, a 0/1 flag) is drawn as separate
    points with their error bars, not joined by a line or a band: there is nothing between
    two of its values."""
    plan = sweep
    ests = sweep.estimates
    n = len(ests)
    fig = Figure(figsize=(7.6, 3.9))
    ax = fig.add_subplot(1, 1, 1)
    # finite points at 0..n-2, the limit set apart at n - 0.4
    xs = [float(i) for i in range(n - 1)] + [n - 0.4]
    ys = [e.value for e in ests]
    half = [Z95 * e.stderr for e in ests]
    if n > 1:
        if not sweep.discrete:
            ax.fill_between(xs[:-1], [y - h for y, h in zip(ys[:-1], half[:-1])],
                            [y + h for y, h in zip(ys[:-1], half[:-1])], color=_BLUE, alpha=0.15, lw=0)
        ax.errorbar(xs[:-1], ys[:-1], yerr=half[:-1], fmt=sweep_style(sweep), color=_BLUE, ms=4, lw=1.2, capsize=3,
                    label="Monte Carlo price, 95% " + ("interval" if sweep.discrete else "band"))
        ax.axvline(n - 1.2, color=_GREY, lw=0.8, ls=":")
    ax.errorbar([xs[-1]], [ys[-1]], yerr=[half[-1]], fmt="s", color=_ORANGE, ms=6, capsize=4,
                label="at the limit")
    if sweep.target is not None:
        ax.axhline(sweep.target, color=_GREEN, lw=1.4, ls="--",
                   label=f"base case {tick(sweep.target)}")
    labels = [_tick(v) for v in plan.values]
    ax.set_xticks(xs)
    ax.set_xticklabels(labels, rotation=0 if max(len(s) for s in labels) < 7 else 30)
    ax.set_xlim(-0.5, xs[-1] + 0.5)
    others = [k for k in plan.points[0] if k != plan.param] if plan.points else []
    finite = plan.points[:-1]
    moved, held, until = [], [], []
    for k in others:
        before = {repr(p[k]) for p in finite}
        if len(before) > 1:
            moved.append(k)
        elif not finite or finite[0][k] == plan.points[-1][k]:
            held.append(f"{k}={_tick(plan.points[-1][k])}")
        else:
            until.append(f"{k}={_tick(finite[0][k])} until the limit")
    extra = ([f"{', '.join(moved)} moved alongside"] if moved else []) + \
        ([f"{', '.join(held)} held"] if held else []) + until
    ax.set_xlabel(plan.param + (f"   ({'; '.join(extra)})" if extra else ""))
    ax.set_ylabel("price")
    ax.set_title(title or f"{plan.product} / {plan.case}", fontsize=11)
    ax.grid(True, color="#dddddd", lw=0.6)
    ax.legend(loc="best", fontsize=8, frameon=False)
    # fixed margins: tight_layout would draw the figure a second time to measure it
    fig.subplots_adjust(left=0.085, right=0.985, bottom=0.2, top=0.91)
    return _png(fig)


def sweep_style(sweep: "SweepSeries") -> str:
    """The matplotlib format of a sweep's points: joined for a continuous parameter, apart
    for one that takes whole values only."""
    return "o" if sweep.discrete else "o-"


def convergence_png(conv: "ConvergenceSeries") -> bytes:
    """Standard error against paths (log-log) beside the estimate against paths."""
    ests = conv.estimates
    n = [e.paths for e in ests]
    se = [e.stderr for e in ests]
    fig = Figure(figsize=(8.4, 3.4))
    ax1 = fig.add_subplot(1, 2, 1)
    ax1.loglog(n, se, "o-", color=_BLUE, ms=4, label="standard error")
    if se and se[-1] > 0:
        ref = [se[-1] * math.sqrt(n[-1] / k) for k in n]
        ax1.loglog(n, ref, "--", color=_GREY, lw=1, label="∝ 1/√n")
    slope = conv.slope()
    ax1.set_title("standard error" + (f" (slope {slope:.2f})" if slope is not None else ""), fontsize=10)
    _path_axis(ax1, n)
    _plain_log_y(ax1)
    ax1.grid(True, which="both", color="#e4e4e4", lw=0.5)
    ax1.legend(fontsize=8, frameon=False)
    ax2 = fig.add_subplot(1, 2, 2)
    v = [e.value for e in ests]
    h = [Z95 * e.stderr for e in ests]
    ax2.fill_between(n, [a - b for a, b in zip(v, h)], [a + b for a, b in zip(v, h)], color=_BLUE, alpha=0.15, lw=0)
    ax2.plot(n, v, "o-", color=_BLUE, ms=4)
    _path_axis(ax2, n)
    ax2.set_title("estimate with 95% band", fontsize=10)
    ax2.grid(True, which="both", color="#e4e4e4", lw=0.5)
    fig.suptitle(conv.label, fontsize=11)
    fig.subplots_adjust(left=0.08, right=0.985, bottom=0.24, top=0.82, wspace=0.25)
    return _png(fig)


def steps_png(steps: "StepSeries") -> bytes:
    """The estimate with its 95% band against the model's time-step parameter."""
    x = list(steps.values)
    v = [e.value for e in steps.estimates]
    h = [Z95 * e.stderr for e in steps.estimates]
    fig = Figure(figsize=(6.0, 3.4))
    ax = fig.add_subplot(1, 1, 1)
    ax.errorbar(x, v, yerr=h, fmt="o-", color=_BLUE, ms=4, capsize=3)
    ax.set_xscale("log", base=2)
    ax.set_xticks(x)
    ax.set_xticklabels([str(k) for k in x])
    ax.set_xlabel(steps.param)
    ax.set_ylabel("price")
    ax.set_title(f"{steps.label}: time step", fontsize=10)
    ax.grid(True, color="#e4e4e4", lw=0.5)
    fig.subplots_adjust(left=0.12, right=0.97, bottom=0.17, top=0.88)
    return _png(fig)


def formula_png(latex: str, fontsize: float = 15.0) -> bytes | None:
    """``latex`` typeset by matplotlib's mathtext as a tight PNG; ``None`` when mathtext
    cannot typeset it (the caller then shows sympy's text rendering)."""
    buf = io.BytesIO()
    try:
        mathtext.math_to_image(f"${latex}$", buf, prop=FontProperties(size=fontsize), dpi=110, format="png")
    except (ValueError, RuntimeError):
        return None
    return buf.getvalue()
