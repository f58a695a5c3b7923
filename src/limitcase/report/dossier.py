"""The limit-behaviour dossier rendered: one self-contained HTML page per product (and a
Markdown twin), and an index of every product and case.

This module only renders: it reads a :class:`limitcase.document.records.Dossier` (built by
:func:`limitcase.document.build_dossier`) and draws its pictures with
:mod:`limitcase.report.plots`; it prices nothing.

A page holds the payoff (formula typeset by matplotlib's mathtext where the product states
one, else sympy's text rendering), the docstring (its reStructuredText rendered), the
declared parameters and their ranges, each reduction with its sweep picture and verdict, the
relations and audits with their verdicts, and the convergence pictures. Pictures are PNG,
embedded in the HTML as base64 data URIs (nothing is fetched when a page is opened) and
written under ``img/`` for the Markdown files.

A folder is reused safely: the files a run writes are listed in ``.limitcase-dossier``
(the manifest); the next run into the same folder removes the files the previous manifest
lists and this run did not write (pages of products no longer there), and nothing else, so
a user's own files beside the dossier are never touched.
"""

from __future__ import annotations

import base64
import html
import os
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable, Sequence

from ..errors import InputError
from .dossier_md import index_md, product_md
from .dossier_text import counts, reproduce, score_text, settings_line
from .jsonfile import write_text_atomic
from .markup import rest_to_html
from .numbers import count, num

if TYPE_CHECKING:  # pragma: no cover
    from ..document.records import Dossier, LimitRecord, ProductPage, SweepSeries
    from ..verdict import Outcome

__all__ = ["MANIFEST", "write_dossier", "render_pictures"]

MANIFEST = ".limitcase-dossier"
"""The file, in a dossier folder, listing the files the last run wrote there."""

_num = num

_CSS = """
body{font-family:-apple-system,'Segoe UI',Helvetica,Arial,sans-serif;margin:0;color:#1d232b;background:#f6f7f9}
main{max-width:1020px;margin:0 auto;padding:18px 26px 60px;background:#fff;min-height:100vh}
header.top{font-size:13px;color:#5a6570;border-bottom:1px solid #e3e6ea;padding-bottom:6px;margin-bottom:8px}
header.top a{color:#1f5fa8;text-decoration:none}
h1{font-size:26px;margin:14px 0 2px} h2{font-size:19px;margin:28px 0 8px;border-bottom:1px solid #e3e6ea;padding-bottom:3px}
h3{font-size:16px;margin:20px 0 6px} h4{font-size:14px;margin:10px 0 4px}
.where{color:#6b7580;font-size:12px;margin:0 0 10px;word-break:break-all}
.doc{font-size:14px;line-height:1.45;background:#f9fafb;border-left:3px solid #c9d3de;padding:2px 12px}
.doc p{margin:6px 0} .doc code{background:#eef1f4;padding:0 3px;border-radius:3px;font-size:13px}
.doc img.math{vertical-align:middle}
table{border-collapse:collapse;font-size:13px;margin:6px 0}
th,td{padding:4px 9px;border-bottom:1px solid #e8ebee;text-align:left;vertical-align:top}
th{background:#f1f3f6;font-weight:600}
td.n{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
.badge{display:inline-block;padding:1px 8px;border-radius:10px;font-size:12px;font-weight:600;color:#fff}
.pass{background:#2e8b57}.fail{background:#c0392b}.error{background:#8e44ad}.info{background:#6b7580}
.note{font-size:13px;color:#3c4650;margin:4px 0}
.muted{color:#7a848e;font-size:12px}
img.plot{max-width:100%;border:1px solid #eceff2;margin:6px 0}
img.formula{max-width:100%;margin:6px 0 2px}
pre{background:#f4f6f8;padding:8px 10px;font-size:12px;overflow-x:auto}
details{margin:4px 0 10px} summary{cursor:pointer;font-size:13px;color:#1f5fa8}
.sum{display:flex;gap:14px;flex-wrap:wrap;margin:8px 0 6px;font-size:14px}
.sum div{background:#f1f3f6;border-radius:6px;padding:6px 12px}
"""


def _e(x: Any) -> str:
    return html.escape(str(x), quote=True)


def _badge(verdict: str, text: str | None = None) -> str:
    cls = verdict if verdict in ("pass", "fail", "error") else "info"
    return f'<span class="badge {cls}">{_e((text or verdict).upper())}</span>'


def _img(png: bytes | None, alt: str, cls: str = "plot") -> str:
    if png is None:
        return ""
    data = base64.b64encode(png).decode("ascii")
    return f'<img class="{cls}" alt="{_e(alt)}" src="data:image/png;base64,{data}">'


def _value(o: "Outcome") -> str:
    if o.value is None:
        return "-"
    return f"{_num(o.value)} ± {_num(o.stderr, 2)}"


def _reference(o: "Outcome") -> str:
    if o.reference is None:
        return "-"
    sense = "" if o.sense == "==" else f"{o.sense} "
    return sense + _num(o.reference)


def _page(title: str, body: str) -> str:
    return (
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
        f"<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"><title>{_e(title)}</title>"
        f"<style>{_CSS}</style></head><body><main>{body}</main></body></html>\n"
    )


# ----------------------------------------------------------------------------------------
# pictures


def render_pictures(page: "ProductPage") -> dict[str, bytes]:
    """Every picture of ``page``, drawn from its records: ``formula``, ``sweep:<k>``,
    ``limit:<k>``, ``base:<k>``, ``convergence``, ``steps`` (keys present when drawn)."""
    from . import plots  # matplotlib only when a dossier is written

    pics: dict[str, bytes] = {}

    def put(key: str, png: bytes | None) -> None:
        if png:
            pics[key] = png

    if page.formula is not None and page.formula.latex:
        put("formula", plots.formula_png(page.formula.latex))
    for k, lim in enumerate(page.limits):
        if lim.sweep is not None and lim.sweep.error is None and lim.sweep.estimates:
            put(f"sweep:{k}", plots.sweep_png(lim.sweep))
        rec = lim.recognition
        if rec is not None and rec.limit_latex is not None:
            put(f"limit:{k}", plots.formula_png(rec.limit_latex, 13))
        if rec is not None and rec.base_latex is not None and rec.status != "equal":
            put(f"base:{k}", plots.formula_png(rec.base_latex, 13))
    conv = page.convergence
    if conv is not None and conv.error is None and len(conv.estimates) >= 2:
        put("convergence", plots.convergence_png(conv))
    st = page.steps
    if st is not None and st.error is None and st.estimates:
        put("steps", plots.steps_png(st))
    return pics


def _math_img(tex: str) -> str | None:
    from . import plots

    png = plots.formula_png(tex, 11)
    return _img(png, tex, "math") if png else None


# ----------------------------------------------------------------------------------------
# HTML


def _outcome_rows(outs: Sequence["Outcome"]) -> str:
    rows = []
    for o in outs:
        what = o.note or o.target_source
        rows.append(
            f"<tr><td>{_e(o.case)}</td><td>{_e(what)}</td><td class=n>{_e(_value(o))}</td>"
            f"<td class=n>{_e(_reference(o))}</td><td class=n>{_e(_num(o.z, 3))}</td>"
            f"<td class=n>{_e(_num(o.p_adjusted, 3))}</td><td>{_badge(o.verdict)}</td></tr>"
        )
        if o.message and o.verdict != "pass":
            rows.append(f'<tr><td></td><td colspan=6 class="note">{_e(o.message)}</td></tr>')
    head = ("<tr><th>case</th><th>what must hold</th><th>MC value ± SE</th><th>target</th><th>z</th>"
            "<th>adjusted p</th><th>verdict</th></tr>")
    return f"<table>{head}{''.join(rows)}</table>"


def _audit_rows(outs: Sequence["Outcome"]) -> str:
    head = "<tr><th>audit</th><th>statistic</th><th>expected</th><th>adjusted p</th><th>verdict</th><th>what was measured</th></tr>"
    rows = [
        f"<tr><td>{_e(o.case)}</td><td class=n>{_e(_num(o.value, 5))}</td><td class=n>{_e(_num(o.reference, 5))}</td>"
        f"<td class=n>{_e(_num(o.p_adjusted, 3))}</td><td>{_badge(o.verdict)}</td><td class=note>{_e(o.message)}</td></tr>"
        for o in outs
    ]
    return f"<table>{head}{''.join(rows)}</table>"


def _check_table(o: "Outcome") -> str:
    items = [
        ("Monte Carlo value at the limit", _value(o)),
        ("reference", f"{_reference(o)} ({o.target_source})" if o.target_source else _reference(o)),
        ("difference", _num(o.difference, 4)),
        ("z", _num(o.z, 3)),
        ("p / adjusted p (Holm)", f"{_num(o.p_value, 3)} / {_num(o.p_adjusted, 3)}"),
        ("smallest bias detectable (90% power)", _num(o.detectable_bias, 3)
         + (f" ({100 * o.detectable_relative:.2g}% of the reference)" if o.detectable_relative else "")),
    ]
    if o.pathwise_ok is not None:
        items.append(("path by path", "identical on every path" if o.pathwise_ok else "BROKEN"))
    message = o.message
    if o.allowance:
        items.append(("declared allowance", f"{_num(o.allowance, 4)}: {o.allowance_reason}"))
        message = "; ".join(m for m in message.split("; ") if not m.startswith("allowance "))
    if message:
        items.append(("message", message))
    rows = "".join(f"<tr><th>{_e(k)}</th><td>{_e(v)}</td></tr>" for k, v in items)
    return f"<table>{rows}</table>"


def _sweep_table(sw: "SweepSeries") -> str:
    head = f"<tr><th>{_e(sw.param)}</th><th>other moved parameters</th><th>MC price ± SE</th></tr>"
    rows = []
    for pt, est in zip(sw.points, sw.estimates):
        others = ", ".join(f"{k}={_num(v)}" for k, v in pt.items() if k != sw.param) or "-"
        rows.append(f"<tr><td class=n>{_e(_num(pt[sw.param]))}</td><td>{_e(others)}</td>"
                    f"<td class=n>{_e(_num(est.value))} ± {_e(_num(est.stderr, 2))}</td></tr>")
    how = "on common paths (one set of paths for every point)" if sw.shared_paths else "each point on its own paths"
    return (f"<details><summary>sweep values ({len(sw.estimates)} points, priced {how})</summary>"
            f"<table>{head}{''.join(rows)}</table></details>")


def _recognition_html(lim: "LimitRecord", k: int, pics: dict[str, bytes]) -> str:
    rec = lim.recognition
    if rec is None:
        return ""
    label = {"equal": "recognised", "differs": "differs", "undecided": "undecided", "n/a": "n/a", "error": "error"}
    cls = {"equal": "pass", "differs": "fail", "error": "error"}.get(rec.status, "info")
    out = [f'<p class="note"><b>Symbolic:</b> <span class="badge {cls}">{_e(label.get(rec.status, rec.status))}</span> '
           f"{_e(rec.message)}</p>"]
    if rec.limit_text is not None:
        out.append('<p class="muted">formula at the limit, parameters substituted:</p>')
        out.append(_img(pics[f"limit:{k}"], "formula at the limit", "formula") if f"limit:{k}" in pics
                   else f"<pre>{_e(rec.limit_text)}</pre>")
    if rec.base_text is not None and rec.status != "equal":
        out.append(f'<p class="muted">formula of {_e(rec.base)}:</p>')
        out.append(_img(pics[f"base:{k}"], "base formula", "formula") if f"base:{k}" in pics
                   else f"<pre>{_e(rec.base_text)}</pre>")
    return "".join(out)


def _mutation_html(d: "Dossier", page: "ProductPage") -> str:
    if d.mutations is None:
        return ""
    sc = d.mutations.scores.get(page.name)
    b = ["<h2>Mutation testing</h2>"]
    if sc is None:
        b.append(f'<p class="muted">{_e(d.mutations.source)} has no mutants of this product.</p>')
        return "".join(b)
    verdict = d.mutations.verdict(page.name)
    b.append(f"<p>{_badge(verdict, 'score' if verdict == 'info' else None)} {_e(score_text(d, page.name))} "
             f"(from {_e(d.mutations.source)})</p>")
    if d.mutations.threshold is None:
        b.append('<p class="muted">A score, not a verdict: no --min-score was set, so it does not change the '
                 "exit status. Each survivor below is a change to the payoff no check saw.</p>")
    for m in d.mutations.survivors.get(page.name, []):
        b.append(f"<h3>survivor {_e(m.get('operator', ''))} at {_e(m.get('location', ''))}</h3>")
        b.append(f"<pre>{_e(m.get('diff', ''))}</pre>")
        if m.get("suggestion"):
            b.append(f'<p class="note">{_e(m["suggestion"])}</p>')
    return "".join(b)


def _product_html(d: "Dossier", page: "ProductPage", pics: dict[str, bytes]) -> str:
    c = counts(page.outcomes)
    desc = page.description
    b: list[str] = [
        '<header class="top"><a href="index.html">limitcase dossier</a> · ' + _e(page.name) + "</header>",
        f"<h1>{_e(page.name)}</h1>",
        f'<p class="where">class {_e(page.name)} in {_e(desc.source)}</p>',
        f'<div class="sum"><div>{c["pass"]} pass</div><div>{c["fail"]} fail</div><div>{c["error"]} error</div>'
        f"<div>scenario {_e(page.model or '-')}</div></div>",
    ]
    for err in page.errors:
        b.append(f'<p class="note">{_badge("error")} {_e(err)}</p>')
    b.append("<h2>What it pays</h2>")
    if desc.doc:
        b.append(f'<div class="doc">{rest_to_html(desc.doc, _math_img)}</div>')
    if page.formula is not None:
        f = page.formula
        b.append('<p class="muted">payoff paid at the last date, as the product states it (sympy):</p>')
        b.append(_img(pics["formula"], "payoff formula", "formula") if "formula" in pics else f"<pre>{_e(f.text)}</pre>")
        if "formula" in pics:
            b.append(f"<details><summary>as text</summary><pre>{_e(f.text)}</pre></details>")
        b.append(f'<p class="muted">{_e(f.note + "; " if f.note else "")}S_j is the price at the j-th date.</p>')
        v = {"agree": "pass", "disagree": "fail", "error": "error"}.get(f.status, "info")
        b.append(f'<p class="note"><b>Code against formula:</b> {_badge(v)} {_e(f.message)}</p>')
    else:
        b.append('<p class="muted">The product states no formula (<code>formula()</code> returns None); '
                 "its docstring says what it pays.</p>")

    b.append("<h2>Parameters</h2>")
    rows = "".join(f"<tr><td>{_e(p.name)}</td><td class=n>{_e(_num(p.default))}</td><td>{_e(p.range)}</td>"
                   f"<td>{_e(p.doc)}</td></tr>" for p in desc.params)
    b.append(f"<table><tr><th>parameter</th><th>default</th><th>range</th><th>meaning</th></tr>{rows}</table>")
    if desc.ends:  # every end: declared, only enumerated (check --ends), or to declare (with a suggestion)
        b.append("<h2>Parameter ends</h2>")
        rows = "".join(f"<tr><td>{_e(e.param)}.{_e(e.side)}</td><td class=n>{_e(_num(e.end))}</td><td>{_e(e.text)}</td>"
                       f"<td>{_e(e.detail)}{'<br><code>' + _e(e.suggestion) + '</code>' if e.status in ('count', 'large') else ''}"
                       "</td></tr>" for e in desc.ends)
        b.append(f"<table><tr><th>end</th><th>at</th><th>status</th><th>detail</th></tr>{rows}</table>")

    b.append("<h2>Limits</h2>")
    if not page.limits:
        b.append('<p class="muted">No reductions declared.</p>')
    for k, lim in enumerate(page.limits):
        o = lim.outcome
        verdict = o.verdict if o is not None else "error"
        b.append(f'<h3 id="{_e(lim.name)}">{_e(lim.name)} {_badge(verdict)}</h3>')
        note = o.note if o is not None and o.note else lim.note
        if note:
            b.append(f'<p class="note">{_e(note)}</p>')
        sw = lim.sweep
        if f"sweep:{k}" in pics:
            b.append(_img(pics[f"sweep:{k}"], f"sweep of {lim.name}"))
        elif sw is not None and sw.error:
            b.append(f'<p class="muted">No sweep picture: {_e(sw.error)}.</p>')
        elif sw is not None and sw.info:
            b.append(f'<p class="muted">No sweep: {_e(sw.info)}.</p>')
        if sw is not None and sw.estimates:
            b.append(_sweep_table(sw))
        if o is not None:
            b.append(_check_table(o))
        b.append(_recognition_html(lim, k, pics))

    b.append("<h2>Relations</h2>")
    b.append(_outcome_rows(page.relations) if page.relations else '<p class="muted">No relations declared.</p>')
    b.append("<h2>Engine audits</h2>")
    if page.audits:
        b.append(f'<p class="muted">The scenario model {_e(page.model)}, audited once for every product '
                 f"priced on it: {_e(d.audit_note)}.</p>")
        b.append(_audit_rows(page.audits))
    else:
        b.append(f'<p class="muted">{_e(d.audit_note or "No audits for this product.")}</p>')
    if page.other:
        b.append("<h2>Other cases</h2>")
        b.append(_outcome_rows(page.other))

    b.append("<h2>Convergence</h2>")
    conv = page.convergence
    if "convergence" in pics and conv is not None:
        b.append(_img(pics["convergence"], "convergence in paths"))
        b.append(f'<p class="note">The product at its defaults, paths doubling up to {count(conv.paths[-1])} '
                 f"(nested runs). The standard error falls with slope {_num(conv.slope(), 3)} on log-log axes; "
                 "Monte Carlo gives -1/2.</p>")
    elif conv is not None and conv.error is None:
        b.append('<p class="muted">Too few paths for a convergence picture: it needs at least 2048 '
                 "(two nested runs from 1024 paths up).</p>")
    st = page.steps
    if "steps" in pics and st is not None:
        b.append(_img(pics["steps"], "convergence in the time step"))
        b.append(f'<p class="note">The scenario model is discretised: the product at its defaults with the '
                 f"model's {_e(st.param)} at {', '.join(str(v) for v in st.values)} (finer to the right), each "
                 "on its own paths; the estimates settle as the step is refined.</p>")
    elif st is None:
        b.append('<p class="muted">The scenario model is simulated exactly on the product\'s dates '
                 "(no time step to refine).</p>")
    b.append(_mutation_html(d, page))
    b.append("<h2>Reproduce</h2>")
    b.append(f"<pre>{_e(reproduce(d, page.name + '/'))}</pre>")
    b.append(f'<p class="muted">{_e(settings_line(d))}</p>')
    return _page(f"{page.name} — limitcase dossier", "".join(b))


def _mutation_cell(d: "Dossier", name: str) -> str:
    if d.mutations is None:
        return ""
    sc = d.mutations.scores.get(name)
    if sc is None or sc.score is None:
        return '<td class="muted">-</td>'
    verdict = d.mutations.verdict(name)
    badge = _badge(verdict) + " " if verdict != "info" else ""
    return f"<td class=n>{badge}{100 * sc.score:.1f}% ({sc.survived} survived)</td>"


def _index_html(d: "Dossier") -> str:
    s = d.summary
    b = [
        '<header class="top">limitcase dossier</header>',
        "<h1>Limit-behaviour dossier</h1>",
        f'<div class="sum"><div>{len(d.pages)} products</div><div>{s["total"]} cases</div>'
        f'<div>{s["pass"]} pass</div><div>{s["fail"]} fail</div><div>{s["error"]} error</div></div>',
        f'<p class="muted">{_e(settings_line(d))}. Built in {d.settings["seconds"]} s.</p>',
    ]
    b.append("<h2>Products</h2>")
    prow = []
    for page in d.pages:
        c = counts(page.outcomes)
        if page.formula is None:
            formula = '<span class="muted">none stated</span>'
        else:
            st = page.formula.status
            formula = _badge({"agree": "pass", "disagree": "fail", "error": "error"}.get(st, st)) + f" {_e(st)}"
        bad = "; ".join(page.errors)
        prow.append(
            f'<tr><td><a href="{_e(page.slug)}.html">{_e(page.name)}</a></td><td class=n>{len(page.outcomes)}</td>'
            f"<td class=n>{c['pass']}</td><td class=n>{c['fail']}</td><td class=n>{c['error']}</td>"
            f"<td>{formula}</td>{_mutation_cell(d, page.name)}"
            f"<td class=muted>{_e(page.model)}{(' — ' + _e(bad)) if bad else ''}</td></tr>"
        )
    mhead = "<th>mutation score</th>" if d.mutations is not None else ""
    b.append("<table><tr><th>product</th><th>cases</th><th>pass</th><th>fail</th><th>error</th>"
             f"<th>code against formula</th>{mhead}<th>scenario</th></tr>{''.join(prow)}</table>")
    if d.mutations is not None:
        t = d.mutations.threshold
        b.append('<p class="muted">' + _e(f"Mutation scores from {d.mutations.source}; "
                 + ("shown, not judged (no --min-score)." if t is None else f"each must reach {100 * t:.1f}%."))
                 + "</p>")
    b.append("<h2>Cases</h2>")
    head = ("<tr><th>product</th><th>case</th><th>kind</th><th>MC value ± SE</th><th>reference</th>"
            "<th>z</th><th>adjusted p</th><th>verdict</th></tr>")
    rows = []
    for page in d.pages:
        outs = page.outcomes
        link = f'<a href="{_e(page.slug)}.html">{_e(page.name)}</a>'
        if not outs:
            why = "; ".join(page.errors) or "no cases declared"
            rows.append(f"<tr><td>{link}</td><td colspan=7 class=muted>{_e(why)}</td></tr>")
        for i, o in enumerate(outs):
            anchor = f'{_e(page.slug)}.html#{_e(o.case)}' if o.kind == "reduction" else f"{_e(page.slug)}.html"
            rows.append(
                f"<tr><td>{link if i == 0 else ''}</td><td><a href=\"{anchor}\">{_e(o.case)}</a></td>"
                f"<td>{_e(o.kind)}</td><td class=n>{_e(_value(o))}</td><td class=n>{_e(_reference(o))}</td>"
                f"<td class=n>{_e(_num(o.z, 3))}</td><td class=n>{_e(_num(o.p_adjusted, 3))}</td>"
                f"<td>{_badge(o.verdict)}</td></tr>"
            )
    b.append(f"<table>{head}{''.join(rows)}</table>")
    b.append("<h2>Engine audits</h2>")
    if d.audits:
        b.append(f'<p class="muted">{_e(d.audit_note)}.</p>')
        for label, outs in d.audits.items():
            c = counts(outs)
            b.append(f"<h3>{_e(label)}</h3><p class=note>{c['pass']} pass, {c['fail']} fail, {c['error']} error</p>")
            b.append(_audit_rows(outs))
    else:
        b.append(f'<p class="muted">{_e(d.audit_note or "No audits were run.")}</p>')
    b.append("<h2>Reproduce</h2>")
    b.append(f"<pre>{_e(reproduce(d))}</pre>")
    return _page("limitcase dossier", "".join(b))


# ----------------------------------------------------------------------------------------
# writing


def _previous(out: Path) -> list[str]:
    try:
        text = (out / MANIFEST).read_text(encoding="utf-8")
    except OSError:
        return []
    return [line for line in text.splitlines() if line and not line.startswith("#")]


def _ours(name: str) -> bool:
    """A manifest entry this module could have written: a page or a picture in the folder."""
    p = Path(name)
    return (not p.is_absolute() and ".." not in p.parts and p.suffix in (".html", ".md", ".png")
            and (len(p.parts) == 1 or (len(p.parts) == 2 and p.parts[0] == "img")))


def write_dossier(d: "Dossier", outdir: str | Path, progress: Callable[[int, int], None] | None = None,
                  mapper: Callable[[Callable[[Any], Any], list[Any]], Any] | None = None) -> list[Path]:
    """Write ``index.html``, ``index.md``, a page and a Markdown twin per product, and the
    pictures under ``img/``; each file atomically. Files a previous run listed in the
    folder's manifest and this run did not write are removed (and only those). Returns the
    paths written.

    ``mapper(fn, items)`` (default: the built-in ``map``) draws the pages' pictures; give
    one that spreads the work over processes (results in order) to draw them in parallel."""
    out = Path(outdir)
    try:
        (out / "img").mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"{out}: cannot create the dossier folder ({exc}); choose another -o DIR") from exc
    before = _previous(out)
    written: list[Path] = []
    names: list[str] = []

    def put(name: str, data: bytes | str) -> str:
        path = out / name
        try:
            write_text_atomic(path, data)
        except OSError as exc:
            raise InputError(f"{path}: cannot write the dossier page ({exc}); choose another -o DIR") from exc
        written.append(path)
        names.append(name)
        return name

    from . import plots  # noqa: F401  (imported once here, before any worker process is forked)

    drawn = (mapper or map)(render_pictures, list(d.pages))
    for i, (page, pics) in enumerate(zip(d.pages, drawn)):
        images: dict[str, str] = {}
        if "formula" in pics:
            images["formula"] = put(f"img/{page.slug}-formula.png", pics["formula"])
        for k, lim in enumerate(page.limits):
            if f"sweep:{k}" in pics:
                images[f"sweep:{lim.name}"] = put(f"img/{page.slug}-sweep-{k + 1}.png", pics[f"sweep:{k}"])
        for key in ("convergence", "steps"):
            if key in pics:
                images[key] = put(f"img/{page.slug}-{key}.png", pics[key])
        put(f"{page.slug}.html", _product_html(d, page, pics))
        put(f"{page.slug}.md", product_md(d, page, images))
        if progress is not None:
            progress(i + 1, len(d.pages))
    put("index.html", _index_html(d))
    put("index.md", index_md(d))
    keep = set(names)
    for name in before:
        if name not in keep and _ours(name):
            try:
                os.unlink(out / name)
            except OSError:
                pass
    write_text_atomic(out / MANIFEST, "# files written by limitcase report; a rerun removes those it does not write again\n"
                      + "\n".join(names) + "\n")
    return written
