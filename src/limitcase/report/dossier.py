"""The limit-behaviour dossier: one self-contained HTML page per product (and a Markdown
twin), and an index of every product and case.

:func:`build_dossier` computes (it calls the library: the checks with Holm's correction over
the whole run, exactly as ``limitcase check`` does with the same settings; a sweep toward
each declared limit; convergence in the number of paths and, for a model with time steps,
in the step; the symbolic cross-check of a stated formula; the engine audits where the
audits module provides them). :func:`write_dossier` only renders what was computed.

A page holds the payoff (formula typeset by matplotlib's mathtext where the product states
one, else sympy's text rendering), the docstring, the declared parameters and their ranges,
each reduction with its sweep picture and verdict, the relations and audits with their
verdicts, and the convergence pictures. Pictures are PNG, embedded in the HTML as base64
data URIs (nothing is fetched when a page is opened) and written under ``img/`` for the
Markdown files.
"""

from __future__ import annotations

import base64
import html
import inspect
import math
import re
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Sequence

from ..engine import DEFAULT_REGRESSION_PATHS
from ..errors import InputError
from ..product import Product
from ..reduce import Check, Reduction, checks_for
from ..suite import RunResult, run_checks
from ..sweep import DEFAULT_POINTS, Convergence, StepSweep, Sweep, convergence, run_sweep, step_sweep
from ..verdict import Outcome

__all__ = ["Dossier", "ProductPage", "ReductionSection", "FormulaSection", "build_dossier", "write_dossier"]

REPORT_PATHS = 16_384
"""Default paths of a report (a power of two, as Sobol points want): clear pictures, and the
whole catalogue in a minute or two on two cores; ``--paths`` for more."""


@dataclass
class FormulaSection:
    """The stated payoff, how it is shown, and its cross-check against the code."""

    latex: str
    text: str
    png: bytes | None
    note: str
    cross: Any  # symbolic.FormulaCheck


@dataclass
class ReductionSection:
    reduction: Reduction
    outcome: Outcome | None
    sweep: Sweep | None
    png: bytes | None = None
    recognition: Any = None  # symbolic.Recognition
    limit_png: bytes | None = None
    base_png: bytes | None = None


@dataclass
class ProductPage:
    name: str
    slug: str
    qualname: str
    doc: str
    source: str
    params: list[tuple[str, str, str, str]] = field(default_factory=list)
    formula: FormulaSection | None = None
    reductions: list[ReductionSection] = field(default_factory=list)
    relations: list[Outcome] = field(default_factory=list)
    audits: list[Outcome] = field(default_factory=list)
    other: list[Outcome] = field(default_factory=list)
    convergence: Convergence | None = None
    convergence_png: bytes | None = None
    steps: StepSweep | None = None
    steps_png: bytes | None = None
    model: str = ""
    errors: list[str] = field(default_factory=list)

    @property
    def outcomes(self) -> list[Outcome]:
        red = [r.outcome for r in self.reductions if r.outcome is not None]
        return red + self.relations + self.other


@dataclass
class Dossier:
    pages: list[ProductPage]
    result: RunResult
    settings: dict[str, Any]
    audit_note: str = ""
    audits: dict[str, list[Outcome]] = field(default_factory=dict)
    mutations: "MutationSummary | None" = None

    @property
    def ok(self) -> bool:
        """Every case and audit passed, every stated formula agrees with its code, and no
        product failed to build."""
        audits_ok = all(o.verdict == "pass" for outs in self.audits.values() for o in outs)
        formulas_ok = all(p.formula is None or p.formula.cross.status == "agree" for p in self.pages)
        return self.result.ok and audits_ok and formulas_ok and all(not p.errors for p in self.pages)


@dataclass
class MutationSummary:
    """What a saved ``limitcase mutate --json`` run says of each product: its score and its
    surviving mutants (with their diffs and the check that would catch them)."""

    source: str
    scores: dict[str, Any]  # product name -> limitcase.mutate.ProductScore
    survivors: dict[str, list[dict[str, Any]]]


def load_mutations(path: str | Path) -> MutationSummary:
    """Read a ``limitcase mutate --json`` file for the dossier (a mutation run takes
    minutes; the dossier shows the last one rather than rerunning it)."""
    import json

    from ..mutate import scores_from_json

    scores = scores_from_json(path)
    doc = json.loads(Path(path).read_text(encoding="utf-8"))
    survivors: dict[str, list[dict[str, Any]]] = {}
    for m in doc.get("mutants", []):
        if m.get("status") == "survived":
            survivors.setdefault(m.get("product", ""), []).append(m)
    return MutationSummary(str(path), scores, survivors)


def _score_text(sc: Any) -> str:
    if sc is None or sc.score is None:
        return "no mutant that changes a cash flow"
    return (f"{100 * sc.score:.1f}%: {sc.caught} caught, {sc.error} by an error, {sc.survived} survived "
            f"of {sc.caught + sc.error + sc.survived}; {sc.equivalent} equivalent (not scored)")


def _mutation_html(d: Dossier, page: ProductPage) -> str:
    if d.mutations is None:
        return ""
    sc = d.mutations.scores.get(page.name)
    b = ["<h2>Mutation testing</h2>"]
    if sc is None:
        b.append(f'<p class="muted">{_e(d.mutations.source)} has no mutants of this product.</p>')
        return "".join(b)
    verdict = "pass" if sc.survived == 0 else "fail"
    b.append(f"<p>{_badge(verdict)} {_e(_score_text(sc))} (from {_e(d.mutations.source)})</p>")
    for m in d.mutations.survivors.get(page.name, []):
        b.append(f"<h3>survivor {_e(m.get('operator', ''))} at {_e(m.get('location', ''))}</h3>")
        b.append(f"<pre>{_e(m.get('diff', ''))}</pre>")
        if m.get("suggestion"):
            b.append(f'<p class="note">{_e(m["suggestion"])}</p>')
    return "".join(b)


def _mutation_md(d: Dossier, page: ProductPage) -> list[str]:
    if d.mutations is None:
        return []
    sc = d.mutations.scores.get(page.name)
    m = ["## Mutation testing", ""]
    if sc is None:
        return m + [f"_{d.mutations.source} has no mutants of this product._", ""]
    m += [f"{_score_text(sc)} (from {d.mutations.source})", ""]
    for mut in d.mutations.survivors.get(page.name, []):
        m += [f"### survivor {mut.get('operator', '')} at {mut.get('location', '')}", "", "```diff",
              mut.get("diff", ""), "```", "", mut.get("suggestion", ""), ""]
    return m


# ----------------------------------------------------------------------------------------
# computing


def _slug(name: str, taken: set[str]) -> str:
    base = re.sub(r"[^A-Za-z0-9_.-]+", "-", name) or "product"
    slug, k = base, 2
    while slug.lower() in taken or slug.lower() == "index":
        slug, k = f"{base}-{k}", k + 1
    taken.add(slug.lower())
    return slug


def _source(cls: type) -> str:
    try:
        return str(Path(inspect.getfile(cls)).resolve())
    except (TypeError, OSError):
        return cls.__module__


def _num(x: Any, digits: int = 6) -> str:
    if x is None:
        return "-"
    if isinstance(x, bool):
        return str(x)
    if isinstance(x, int):
        return str(x)
    if isinstance(x, float):
        if math.isinf(x):
            return "inf" if x > 0 else "-inf"
        if math.isnan(x):
            return "nan"
        return f"{x:.{digits}g}"
    return str(x)


def _audit_outcomes(models: dict[str, Any], paths: int, seed: int, alpha: float) -> tuple[dict[str, list[Outcome]], str]:
    """The engine audits of each distinct scenario model, Holm over all their outcomes
    (one family of its own, as ``limitcase.audits.run_audits`` forms it); keyed by the
    model's label. Empty, with a note, when the audits module is not there."""
    try:
        from .. import audits as audit_module
    except ImportError:
        return {}, "the audits module is not installed; no engine audits were run"
    from ..verdict import finalise

    per: dict[str, list[Outcome]] = {}
    flat: list[Outcome] = []
    for label, model in models.items():
        outs = audit_module.audit_model(model, paths=paths, seed=seed, alpha=alpha)
        per[label] = outs
        flat.extend(outs)
    final = iter(finalise(flat, alpha))
    per = {label: [next(final) for _ in outs] for label, outs in per.items()}
    n = len(flat)
    return per, (f"engine audits of the scenario models ({paths:,} paths each), Holm over their {n} "
                 f"outcomes at {alpha:g}, a family of its own")


def build_dossier(
    products: Sequence[type[Product]],
    *,
    paths: int = REPORT_PATHS,
    seed: int,
    alpha: float,
    points: int = DEFAULT_POINTS,
    regression_paths: int = DEFAULT_REGRESSION_PATHS,
    selects: Sequence[str] = (),
    sources: Sequence[str] = (),
    audits: bool = True,
    audit_paths: int | None = None,
    method: str = "auto",
    workers: int = 1,
    progress: Callable[[int, int], None] | None = None,
) -> Dossier:
    """Compute everything the dossier of ``products`` shows.

    The checks of every product are run together (:func:`limitcase.suite.run_checks`, Holm
    over the run, sampling ``method`` as ``limitcase check --method``, default ``auto``):
    with the same ``paths``, ``seed``, ``alpha`` and method their verdicts are those of
    ``limitcase check``. Sweeps and convergence runs use plain Monte Carlo (each point's
    standard error is then the textbook ``sigma / sqrt(n)`` one). ``selects`` keeps the products whose name contains one of the
    strings (all when empty).
    """
    from .. import symbolic
    from . import plots  # matplotlib only when a dossier is built

    started = time.monotonic()
    chosen = [c for c in products if not selects or any(s in c.__name__ for s in selects)]
    if not chosen:
        raise InputError(f"no product matches --select {', '.join(selects)!r}; products: "
                         + ", ".join(c.__name__ for c in products))
    taken: set[str] = set()
    pages: list[ProductPage] = []
    instances: list[Product | None] = []
    all_checks: list[Check] = []
    spans: list[tuple[int, int]] = []
    for cls in chosen:
        page = ProductPage(
            name=cls.__name__, slug=_slug(cls.__name__, taken), qualname=f"{cls.__module__}.{cls.__qualname__}",
            doc=inspect.getdoc(cls) or "", source=_source(cls),
        )
        for pname, spec in cls.param_specs().items():
            page.params.append((pname, _num(spec.default), spec.range_text(), spec.doc))
        try:
            product = cls()
            page.model = product.scenario().label()
            checks = checks_for(product)
        except Exception as exc:  # bad defaults or a scenario that raises
            page.errors.append(f"{cls.__name__} cannot be built at its defaults: {type(exc).__name__}: {exc}")
            product, checks = None, []
        spans.append((len(all_checks), len(all_checks) + len(checks)))
        all_checks.extend(checks)
        instances.append(product)
        pages.append(page)

    sweeps = sum(len(type(p).reductions) for p in instances if p is not None)
    total = len(all_checks) + sweeps + 2 * sum(p is not None for p in instances)
    done = [0]

    def tick(k: int = 1) -> None:
        done[0] += k
        if progress is not None:
            progress(min(done[0], total), total)

    result = run_checks(all_checks, paths=paths, seed=seed, alpha=alpha, regression_paths=regression_paths,
                        progress=lambda i, n: progress(i, total) if progress else None,
                        method=method, workers=workers,
                        audit_models=False)  # the dossier runs its models' audits itself, a family of their own
    done[0] = len(all_checks)

    for page, product, (a, b) in zip(pages, instances, spans):
        outs = result.outcomes[a:b]
        if product is None:
            continue
        cls = type(product)
        by_case = {o.case: o for o in outs if o.kind == "reduction"}
        page.relations = [o for o in outs if o.kind == "relation"]
        page.other = [o for o in outs if o.kind not in ("relation", "reduction")]
        # the formula and its cross-check
        try:
            has_formula = product.formula() is not None
        except Exception as exc:
            page.errors.append(f"{cls.__name__}.formula() raised {type(exc).__name__}: {exc}")
            has_formula = False
        if has_formula:
            page.formula = _formula_section(product, seed)
        for red in cls.reductions:
            sec = ReductionSection(red, by_case.get(red.name), None)
            sw = run_sweep(product, red, paths=paths, seed=seed, points=points, regression_paths=regression_paths)
            sec.sweep = sw
            if sw.error is None and sw.estimates:
                sec.png = plots.sweep_png(sw)
            if has_formula:
                sec.recognition = symbolic.recognise(product, red)
                rec = sec.recognition
                if rec.limit_formula is not None:
                    sec.limit_png = plots.formula_png(symbolic.to_latex(rec.limit_formula), 13)
                if rec.base_formula is not None:
                    sec.base_png = plots.formula_png(symbolic.to_latex(rec.base_formula), 13)
            page.reductions.append(sec)
            tick()
        conv = convergence(product, paths=paths, seed=seed, regression_paths=regression_paths)
        page.convergence = conv
        if conv.error is None and len(conv.estimates) >= 2:
            page.convergence_png = plots.convergence_png(conv)
        elif conv.error:
            page.errors.append(f"convergence run: {conv.error}")
        tick()
        st = step_sweep(product, paths=paths, seed=seed, regression_paths=regression_paths)
        if st is not None:
            page.steps = st
            if st.error is None and st.estimates:
                page.steps_png = plots.steps_png(st)
            elif st.error:
                page.errors.append(f"time-step run: {st.error}")
        tick()

    audit_note = ""
    per: dict[str, list[Outcome]] = {}
    if audits:
        models: dict[str, Any] = {}
        for p in instances:
            if p is not None:
                m = p.scenario()
                models.setdefault(m.label(), m)
        from ..suite import DEFAULT_PATHS

        per, audit_note = _audit_outcomes(models, audit_paths or DEFAULT_PATHS, seed, alpha)
        for page, p in zip(pages, instances):
            if p is not None:
                page.audits = per.get(p.scenario().label(), [])
    settings = {
        "paths": paths, "seed": seed, "alpha": alpha, "points": points, "method": method,
        "regression_paths": regression_paths, "sources": list(sources),
        "seconds": round(time.monotonic() - started, 1),
    }
    result.extra.update(
        points=points,
        formula_checks={p.name: p.formula.cross.status for p in pages if p.formula is not None},
        audits={label: {o.case: o.verdict for o in outs} for label, outs in per.items()},
    )
    return Dossier(pages, result, settings, audit_note, per)


def _formula_section(product: Product, seed: int) -> FormulaSection:
    from .. import symbolic
    from . import plots

    cross = symbolic.cross_check(product, seed=seed)
    shown, note = symbolic.compact_instance(product)
    try:
        expr = shown.formula()
        latex, text = symbolic.to_latex(expr), symbolic.to_text(expr)
    except Exception as exc:  # pragma: no cover - formula() already ran once
        return FormulaSection("", f"(formula could not be shown: {exc})", None, note, cross)
    return FormulaSection(latex, text, plots.formula_png(latex), note, cross)


# ----------------------------------------------------------------------------------------
# rendering

_CSS = """
body{font-family:-apple-system,'Segoe UI',Helvetica,Arial,sans-serif;margin:0;color:#1d232b;background:#f6f7f9}
main{max-width:1020px;margin:0 auto;padding:18px 26px 60px;background:#fff;min-height:100vh}
header.top{font-size:13px;color:#5a6570;border-bottom:1px solid #e3e6ea;padding-bottom:6px;margin-bottom:8px}
header.top a{color:#1f5fa8;text-decoration:none}
h1{font-size:26px;margin:14px 0 2px} h2{font-size:19px;margin:28px 0 8px;border-bottom:1px solid #e3e6ea;padding-bottom:3px}
h3{font-size:16px;margin:20px 0 6px}
.where{color:#6b7580;font-size:12px;margin:0 0 10px;word-break:break-all}
.doc{white-space:pre-wrap;font-size:14px;line-height:1.45;background:#f9fafb;border-left:3px solid #c9d3de;padding:8px 12px}
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


def _badge(verdict: str) -> str:
    cls = verdict if verdict in ("pass", "fail", "error") else "info"
    return f'<span class="badge {cls}">{_e(verdict.upper())}</span>'


def _img(png: bytes | None, alt: str, cls: str = "plot") -> str:
    if png is None:
        return ""
    data = base64.b64encode(png).decode("ascii")
    return f'<img class="{cls}" alt="{_e(alt)}" src="data:image/png;base64,{data}">'


def _value(o: Outcome) -> str:
    if o.value is None:
        return "-"
    return f"{_num(o.value)} ± {_num(o.stderr, 2)}"


def _reference(o: Outcome) -> str:
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


def _reproduce(d: Dossier, select: str = "") -> str:
    srcs = " ".join(d.settings.get("sources") or [])
    cmd = f"limitcase check {srcs}".rstrip()
    cmd += f" --seed {d.settings['seed']} --paths {d.settings['paths']} --alpha {d.settings['alpha']:g}"
    if d.settings.get("method", "auto") != "auto":
        cmd += f" --method {d.settings['method']}"
    if select:
        cmd += f" --select '{select}'"
    return cmd


def _settings_line(d: Dossier) -> str:
    s = d.settings
    return (f"paths {s['paths']:,} per check and per sweep point, seed {s['seed']}, checks sampled by "
            f"method {s.get('method', 'auto')}, family-wise false-alarm rate {s['alpha']:g} (Holm over all "
            f"{d.result.summary['total']} cases of the run); sweeps and convergence runs plain Monte Carlo; "
            f"bands are 95% (value ± 1.96 standard errors)")


def _outcome_rows(outs: Sequence[Outcome]) -> str:
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


def _audit_rows(outs: Sequence[Outcome]) -> str:
    head = "<tr><th>audit</th><th>statistic</th><th>expected</th><th>adjusted p</th><th>verdict</th><th>what was measured</th></tr>"
    rows = [
        f"<tr><td>{_e(o.case)}</td><td class=n>{_e(_num(o.value, 5))}</td><td class=n>{_e(_num(o.reference, 5))}</td>"
        f"<td class=n>{_e(_num(o.p_adjusted, 3))}</td><td>{_badge(o.verdict)}</td><td class=note>{_e(o.message)}</td></tr>"
        for o in outs
    ]
    return f"<table>{head}{''.join(rows)}</table>"


def _check_table(o: Outcome) -> str:
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


def _sweep_table(sw: Sweep) -> str:
    head = f"<tr><th>{_e(sw.plan.param)}</th><th>other moved parameters</th><th>MC price ± SE</th></tr>"
    rows = []
    for pt, est in zip(sw.plan.points, sw.estimates):
        others = ", ".join(f"{k}={_num(v)}" for k, v in pt.items() if k != sw.plan.param) or "-"
        rows.append(f"<tr><td class=n>{_e(_num(pt[sw.plan.param]))}</td><td>{_e(others)}</td>"
                    f"<td class=n>{_e(_num(est.value))} ± {_e(_num(est.stderr, 2))}</td></tr>")
    how = "on common paths (one set of paths for every point)" if sw.shared_paths else "each point on its own paths"
    return (f"<details><summary>sweep values ({len(sw.estimates)} points, priced {how})</summary>"
            f"<table>{head}{''.join(rows)}</table></details>")


def _recognition_html(sec: ReductionSection) -> str:
    rec = sec.recognition
    if rec is None:
        return ""
    label = {"equal": "recognised", "differs": "differs", "undecided": "undecided", "n/a": "n/a", "error": "error"}
    cls = {"equal": "pass", "differs": "fail", "error": "error"}.get(rec.status, "info")
    out = [f'<p class="note"><b>Symbolic:</b> <span class="badge {cls}">{_e(label.get(rec.status, rec.status))}</span> '
           f"{_e(rec.message)}</p>"]
    if rec.limit_formula is not None:
        out.append('<p class="muted">formula at the limit, parameters substituted:</p>')
        out.append(_img(sec.limit_png, "formula at the limit", "formula") if sec.limit_png
                   else f"<pre>{_e(_text(rec.limit_formula))}</pre>")
    if rec.base_formula is not None and rec.status != "equal":
        out.append(f'<p class="muted">formula of {_e(rec.base)}:</p>')
        out.append(_img(sec.base_png, "base formula", "formula") if sec.base_png
                   else f"<pre>{_e(_text(rec.base_formula))}</pre>")
    return "".join(out)


def _text(expr: Any) -> str:
    from .. import symbolic

    return symbolic.to_text(expr)


def _counts(outs: Sequence[Outcome]) -> dict[str, int]:
    c = {"pass": 0, "fail": 0, "error": 0}
    for o in outs:
        c[o.verdict] = c.get(o.verdict, 0) + 1
    return c


def _product_html(d: Dossier, page: ProductPage) -> str:
    c = _counts(page.outcomes)
    b: list[str] = [
        '<header class="top"><a href="index.html">limitcase dossier</a> · ' + _e(page.name) + "</header>",
        f"<h1>{_e(page.name)}</h1>",
        f'<p class="where">class {_e(page.name)} in {_e(page.source)}</p>',
        f'<div class="sum"><div>{c["pass"]} pass</div><div>{c["fail"]} fail</div><div>{c["error"]} error</div>'
        f"<div>scenario {_e(page.model or '-')}</div></div>",
    ]
    for err in page.errors:
        b.append(f'<p class="note">{_badge("error")} {_e(err)}</p>')
    b.append("<h2>What it pays</h2>")
    if page.doc:
        b.append(f'<div class="doc">{_e(page.doc)}</div>')
    if page.formula is not None:
        f = page.formula
        b.append('<p class="muted">payoff paid at the last date, as the product states it (sympy):</p>')
        b.append(_img(f.png, "payoff formula", "formula") if f.png else f"<pre>{_e(f.text)}</pre>")
        if f.png:
            b.append(f"<details><summary>as text</summary><pre>{_e(f.text)}</pre></details>")
        if f.note:
            b.append(f'<p class="muted">{_e(f.note)}; S_j is the price at the j-th date.</p>')
        else:
            b.append('<p class="muted">S_j is the price at the j-th date.</p>')
        cross = f.cross
        v = {"agree": "pass", "disagree": "fail", "error": "error"}.get(cross.status, "info")
        b.append(f'<p class="note"><b>Code against formula:</b> {_badge(v)} {_e(cross.message)}</p>')
    else:
        b.append('<p class="muted">The product states no formula (<code>formula()</code> returns None); '
                 "its docstring says what it pays.</p>")

    b.append("<h2>Parameters</h2>")
    rows = "".join(f"<tr><td>{_e(n)}</td><td class=n>{_e(v)}</td><td>{_e(r)}</td><td>{_e(doc)}</td></tr>"
                   for n, v, r, doc in page.params)
    b.append(f"<table><tr><th>parameter</th><th>default</th><th>range</th><th>meaning</th></tr>{rows}</table>")

    b.append("<h2>Limits</h2>")
    if not page.reductions:
        b.append('<p class="muted">No reductions declared.</p>')
    for sec in page.reductions:
        o = sec.outcome
        verdict = o.verdict if o is not None else "error"
        b.append(f'<h3 id="{_e(sec.reduction.name)}">{_e(sec.reduction.name)} {_badge(verdict)}</h3>')
        note = (o.note if o is not None and o.note else sec.reduction.note)
        if note:
            b.append(f'<p class="note">{_e(note)}</p>')
        if sec.png:
            b.append(_img(sec.png, f"sweep of {sec.reduction.name}"))
        elif sec.sweep is not None and sec.sweep.error:
            b.append(f'<p class="muted">No sweep picture: {_e(sec.sweep.error)}.</p>')
        elif sec.sweep is not None and sec.sweep.info:
            b.append(f'<p class="muted">No sweep: {_e(sec.sweep.info)}.</p>')
        if sec.sweep is not None and sec.sweep.estimates:
            b.append(_sweep_table(sec.sweep))
        if o is not None:
            b.append(_check_table(o))
        b.append(_recognition_html(sec))

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
    if page.convergence_png:
        conv = page.convergence
        assert conv is not None
        slope = conv.slope()
        b.append(_img(page.convergence_png, "convergence in paths"))
        b.append(f'<p class="note">The product at its defaults, paths doubling up to {conv.paths[-1]:,} '
                 f"(nested runs). The standard error falls with slope {_num(slope, 3)} on log-log axes; "
                 "Monte Carlo gives -1/2.</p>")
    elif page.convergence is not None and page.convergence.error is None:
        b.append('<p class="muted">Too few paths for a convergence picture: it needs at least 2048 '
                 "(two nested runs from 1024 paths up).</p>")
    if page.steps_png:
        st = page.steps
        assert st is not None
        b.append(_img(page.steps_png, "convergence in the time step"))
        b.append(f'<p class="note">The scenario model is discretised: the product at its defaults with the '
                 f"model's {_e(st.param)} at {', '.join(str(v) for v in st.values)} (finer to the right), each "
                 "on its own paths; the estimates settle as the step is refined.</p>")
    elif page.steps is None:
        b.append('<p class="muted">The scenario model is simulated exactly on the product\'s dates '
                 "(no time step to refine).</p>")
    b.append(_mutation_html(d, page))
    b.append("<h2>Reproduce</h2>")
    b.append(f"<pre>{_e(_reproduce(d, page.name + '/'))}</pre>")
    b.append(f'<p class="muted">{_e(_settings_line(d))}</p>')
    return _page(f"{page.name} — limitcase dossier", "".join(b))


def _mutation_cell(d: Dossier, name: str) -> str:
    if d.mutations is None:
        return ""
    sc = d.mutations.scores.get(name)
    if sc is None or sc.score is None:
        return '<td class="muted">-</td>'
    badge = _badge("pass" if sc.survived == 0 else "fail")
    return f"<td class=n>{badge} {100 * sc.score:.1f}% ({sc.survived} survived)</td>"


def _index_html(d: Dossier) -> str:
    s = d.result.summary
    b = [
        '<header class="top">limitcase dossier</header>',
        "<h1>Limit-behaviour dossier</h1>",
        f'<div class="sum"><div>{len(d.pages)} products</div><div>{s["total"]} cases</div>'
        f'<div>{s["pass"]} pass</div><div>{s["fail"]} fail</div><div>{s["error"]} error</div></div>',
        f'<p class="muted">{_e(_settings_line(d))}. Built in {d.settings["seconds"]} s.</p>',
    ]
    b.append("<h2>Products</h2>")
    prow = []
    for page in d.pages:
        c = _counts(page.outcomes)
        if page.formula is None:
            formula = '<span class="muted">none stated</span>'
        else:
            st = page.formula.cross.status
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
            c = _counts(outs)
            b.append(f"<h3>{_e(label)}</h3><p class=note>{c['pass']} pass, {c['fail']} fail, {c['error']} error</p>")
            b.append(_audit_rows(outs))
    else:
        b.append(f'<p class="muted">{_e(d.audit_note or "No audits were run.")}</p>')
    b.append("<h2>Reproduce</h2>")
    b.append(f"<pre>{_e(_reproduce(d))}</pre>")
    return _page("limitcase dossier", "".join(b))


# Markdown --------------------------------------------------------------------------------


def _md(x: Any) -> str:
    return str(x).replace("|", "\\|").replace("\n", " ")


def _md_table(head: Sequence[str], rows: Sequence[Sequence[str]]) -> str:
    out = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
    out += ["| " + " | ".join(_md(c) for c in r) + " |" for r in rows]
    return "\n".join(out)


def _md_outcomes(outs: Sequence[Outcome]) -> str:
    return _md_table(
        ("case", "what must hold", "MC value ± SE", "target", "z", "adjusted p", "verdict"),
        [(o.case, o.note or o.target_source, _value(o), _reference(o), _num(o.z, 3), _num(o.p_adjusted, 3),
          o.verdict.upper() + (f" ({o.message})" if o.message and o.verdict != "pass" else "")) for o in outs],
    )


def _md_audits(outs: Sequence[Outcome]) -> str:
    return _md_table(("audit", "statistic", "expected", "adjusted p", "verdict", "what was measured"),
                     [(o.case, _num(o.value, 5), _num(o.reference, 5), _num(o.p_adjusted, 3), o.verdict.upper(), o.message)
                      for o in outs])


def _product_md(d: Dossier, page: ProductPage, images: dict[str, str]) -> str:
    c = _counts(page.outcomes)
    m = [f"# {page.name}", "", f"class `{page.name}` in {page.source}", "",
         f"{c['pass']} pass, {c['fail']} fail, {c['error']} error; scenario {page.model or '-'}", ""]
    m += [f"**ERROR** {e}" for e in page.errors]
    m += ["## What it pays", "", "```text", page.doc or "(no docstring)", "```", ""]
    if page.formula is not None:
        f = page.formula
        if "formula" in images:
            m += [f"![payoff formula]({images['formula']})", ""]
        m += ["```text", f.text, "```", ""]
        if f.note:
            m += [f"_{f.note}; S_j is the price at the j-th date._", ""]
        m += [f"Code against formula: **{f.cross.status}** — {f.cross.message}", ""]
    else:
        m += ["_The product states no formula (`formula()` returns None)._", ""]
    m += ["## Parameters", "", _md_table(("parameter", "default", "range", "meaning"), page.params), ""]
    m += ["## Limits", ""]
    for sec in page.reductions:
        o = sec.outcome
        m += [f"### {sec.reduction.name} — {(o.verdict if o else 'error').upper()}", ""]
        note = o.note if o is not None and o.note else sec.reduction.note
        if note:
            m += [note, ""]
        key = f"sweep:{sec.reduction.name}"
        if key in images:
            m += [f"![sweep of {sec.reduction.name}]({images[key]})", ""]
        elif sec.sweep is not None and sec.sweep.error:
            m += [f"_No sweep picture: {sec.sweep.error}._", ""]
        elif sec.sweep is not None and sec.sweep.info:
            m += [f"_No sweep: {sec.sweep.info}._", ""]
        if sec.sweep is not None and sec.sweep.estimates:
            sw = sec.sweep
            m += [_md_table((sw.plan.param, "MC price ± SE"),
                            [(_num(pt[sw.plan.param]), f"{_num(e.value)} ± {_num(e.stderr, 2)}")
                             for pt, e in zip(sw.plan.points, sw.estimates)]), ""]
        if o is not None:
            m += [f"- value at the limit {_value(o)}; reference {_reference(o)} ({o.target_source}); "
                  f"z {_num(o.z, 3)}; adjusted p {_num(o.p_adjusted, 3)}; smallest detectable bias "
                  f"{_num(o.detectable_bias, 3)}"]
            if o.allowance:
                m += [f"- declared allowance {_num(o.allowance, 4)}: {o.allowance_reason}"]
            if o.message:
                m += [f"- {o.message}"]
            m += [""]
        if sec.recognition is not None:
            m += [f"Symbolic: **{sec.recognition.status}** — {sec.recognition.message}", ""]
    m += ["## Relations", "", _md_outcomes(page.relations) if page.relations else "_None declared._", ""]
    m += ["## Engine audits", "", (f"_Scenario model {page.model}: {d.audit_note}._\n\n" + _md_audits(page.audits))
          if page.audits else f"_{d.audit_note or 'None.'}_", ""]
    if page.other:
        m += ["## Other cases", "", _md_outcomes(page.other), ""]
    m += ["## Convergence", ""]
    if "convergence" in images:
        m += [f"![convergence in paths]({images['convergence']})", ""]
    if "steps" in images:
        m += [f"![convergence in the time step]({images['steps']})", ""]
    m += _mutation_md(d, page)
    m += ["## Reproduce", "", "```bash", _reproduce(d, page.name + "/"), "```", "", f"_{_settings_line(d)}_", ""]
    return "\n".join(m)


def _index_md(d: Dossier) -> str:
    s = d.result.summary
    m = ["# Limit-behaviour dossier", "",
         f"{len(d.pages)} products, {s['total']} cases: {s['pass']} pass, {s['fail']} fail, {s['error']} error.", "",
         f"_{_settings_line(d)}_", ""]
    rows = []
    for page in d.pages:
        for i, o in enumerate(page.outcomes):
            rows.append((f"[{page.name}]({page.slug}.md)" if i == 0 else "", o.case, o.kind, _value(o),
                         _reference(o), _num(o.z, 3), _num(o.p_adjusted, 3), o.verdict.upper()))
        if not page.outcomes:
            rows.append((f"[{page.name}]({page.slug}.md)", "-", "-", "-", "-", "-", "-",
                         "; ".join(page.errors) or "no cases"))
    m += [_md_table(("product", "case", "kind", "MC value ± SE", "reference", "z", "adjusted p", "verdict"), rows), ""]
    m += ["## Engine audits", "", f"_{d.audit_note or 'No audits were run.'}_", ""]
    for label, outs in d.audits.items():
        m += [f"### {label}", "", _md_audits(outs), ""]
    m += ["```bash", _reproduce(d), "```", ""]
    return "\n".join(m)


def write_dossier(d: Dossier, outdir: str | Path) -> list[Path]:
    """Write ``index.html``, ``index.md``, a page and a Markdown twin per product, and the
    pictures under ``img/``. Returns the paths written."""
    out = Path(outdir)
    try:
        (out / "img").mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"{out}: cannot create the dossier folder ({exc}); choose another -o DIR") from exc
    written: list[Path] = []

    def put(name: str, data: bytes | str) -> str:
        path = out / name
        if isinstance(data, bytes):
            path.write_bytes(data)
        else:
            path.write_text(data, encoding="utf-8")
        written.append(path)
        return name

    for page in d.pages:
        images: dict[str, str] = {}
        if page.formula is not None and page.formula.png:
            images["formula"] = put(f"img/{page.slug}-formula.png", page.formula.png)
        for k, sec in enumerate(page.reductions):
            if sec.png:
                images[f"sweep:{sec.reduction.name}"] = put(f"img/{page.slug}-sweep-{k + 1}.png", sec.png)
        if page.convergence_png:
            images["convergence"] = put(f"img/{page.slug}-convergence.png", page.convergence_png)
        if page.steps_png:
            images["steps"] = put(f"img/{page.slug}-steps.png", page.steps_png)
        put(f"{page.slug}.html", _product_html(d, page))
        put(f"{page.slug}.md", _product_md(d, page, images))
    put("index.html", _index_html(d))
    put("index.md", _index_md(d))
    return written
