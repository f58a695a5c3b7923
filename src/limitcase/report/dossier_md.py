"""The dossier's Markdown twins: the same records as the HTML pages, pictures linked
from ``img/``. Rendering only (see :mod:`limitcase.report.dossier`)."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Sequence

from .dossier_text import counts, reproduce, score_text, settings_line
from .markup import rest_to_markdown
from .numbers import num

if TYPE_CHECKING:  # pragma: no cover
    from ..document.records import Dossier, ProductPage
    from ..verdict import Outcome

__all__ = ["product_md", "index_md"]

_num = num


def _md(x: Any) -> str:
    return str(x).replace("|", "\\|").replace("\n", " ")


def _table(head: Sequence[str], rows: Sequence[Sequence[str]]) -> str:
    out = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
    out += ["| " + " | ".join(_md(c) for c in r) + " |" for r in rows]
    return "\n".join(out)


def _value(o: "Outcome") -> str:
    return "-" if o.value is None else f"{_num(o.value)} ± {_num(o.stderr, 2)}"


def _reference(o: "Outcome") -> str:
    if o.reference is None:
        return "-"
    return ("" if o.sense == "==" else f"{o.sense} ") + _num(o.reference)


def _outcomes(outs: Sequence["Outcome"]) -> str:
    return _table(
        ("case", "what must hold", "MC value ± SE", "target", "z", "adjusted p", "verdict"),
        [(o.case, o.note or o.target_source, _value(o), _reference(o), _num(o.z, 3), _num(o.p_adjusted, 3),
          o.verdict.upper() + (f" ({o.message})" if o.message and o.verdict != "pass" else "")) for o in outs],
    )


def _audits(outs: Sequence["Outcome"]) -> str:
    return _table(("audit", "statistic", "expected", "adjusted p", "verdict", "what was measured"),
                  [(o.case, _num(o.value, 5), _num(o.reference, 5), _num(o.p_adjusted, 3), o.verdict.upper(), o.message)
                   for o in outs])


def _mutation(d: "Dossier", page: "ProductPage") -> list[str]:
    if d.mutations is None:
        return []
    sc = d.mutations.scores.get(page.name)
    m = ["## Mutation testing", ""]
    if sc is None:
        return m + [f"_{d.mutations.source} has no mutants of this product._", ""]
    verdict = d.mutations.verdict(page.name)
    lead = "" if verdict == "info" else f"**{verdict.upper()}** "
    m += [f"{lead}{score_text(d, page.name)} (from {d.mutations.source})", ""]
    if d.mutations.threshold is None:
        m += ["_A score, not a verdict: no --min-score was set._", ""]
    for mut in d.mutations.survivors.get(page.name, []):
        m += [f"### survivor {mut.get('operator', '')} at {mut.get('location', '')}", "", "```diff",
              mut.get("diff", ""), "```", "", mut.get("suggestion", ""), ""]
    return m


def product_md(d: "Dossier", page: "ProductPage", images: dict[str, str]) -> str:
    """One product's Markdown page; ``images`` maps picture keys to their relative paths."""
    c = counts(page.outcomes)
    desc = page.description
    m = [f"# {page.name}", "", f"class `{page.name}` in {desc.source}", "",
         f"{c['pass']} pass, {c['fail']} fail, {c['error']} error; scenario {page.model or '-'}", ""]
    m += [f"**ERROR** {e}" for e in page.errors]
    m += ["## What it pays", "", rest_to_markdown(desc.doc) if desc.doc else "_(no docstring)_", ""]
    if page.formula is not None:
        f = page.formula
        if "formula" in images:
            m += [f"![payoff formula]({images['formula']})", ""]
        m += ["```text", f.text, "```", ""]
        if f.note:
            m += [f"_{f.note}; S_j is the price at the j-th date._", ""]
        m += [f"Code against formula: **{f.status}** — {f.message}", ""]
    else:
        m += ["_The product states no formula (`formula()` returns None)._", ""]
    m += ["## Parameters", "", _table(("parameter", "default", "range", "meaning"),
                                      [(p.name, _num(p.default), p.range, p.doc) for p in desc.params]), ""]
    if desc.ends:  # every end: declared, only enumerated (check --ends), or to declare (with a suggestion)
        m += ["## Parameter ends", "", _table(("end", "at", "status", "detail"), [
            (f"{e.param}.{e.side}", _num(e.end), e.text,
             e.detail + (f" `{e.suggestion}`" if e.status in ("count", "large") else "")) for e in desc.ends]), ""]
    m += ["## Limits", ""]
    for lim in page.limits:
        o = lim.outcome
        m += [f"### {lim.name} — {(o.verdict if o else 'error').upper()}", ""]
        note = o.note if o is not None and o.note else lim.note
        if note:
            m += [note, ""]
        key = f"sweep:{lim.name}"
        sw = lim.sweep
        if key in images:
            m += [f"![sweep of {lim.name}]({images[key]})", ""]
        elif sw is not None and sw.error:
            m += [f"_No sweep picture: {sw.error}._", ""]
        elif sw is not None and sw.info:
            m += [f"_No sweep: {sw.info}._", ""]
        if sw is not None and sw.estimates:
            m += [_table((sw.param, "MC price ± SE"),
                         [(_num(pt[sw.param]), f"{_num(e.value)} ± {_num(e.stderr, 2)}")
                          for pt, e in zip(sw.points, sw.estimates)]), ""]
        if o is not None:
            m += [f"- value at the limit {_value(o)}; reference {_reference(o)} ({o.target_source}); "
                  f"z {_num(o.z, 3)}; adjusted p {_num(o.p_adjusted, 3)}; smallest detectable bias "
                  f"{_num(o.detectable_bias, 3)}"]
            if o.allowance:
                m += [f"- declared allowance {_num(o.allowance, 4)}: {o.allowance_reason}"]
            if o.message:
                m += [f"- {o.message}"]
            m += [""]
        if lim.recognition is not None:
            m += [f"Symbolic: **{lim.recognition.status}** — {lim.recognition.message}", ""]
    m += ["## Relations", "", _outcomes(page.relations) if page.relations else "_None declared._", ""]
    m += ["## Engine audits", "", (f"_Scenario model {page.model}: {d.audit_note}._\n\n" + _audits(page.audits))
          if page.audits else f"_{d.audit_note or 'None.'}_", ""]
    if page.other:
        m += ["## Other cases", "", _outcomes(page.other), ""]
    m += ["## Convergence", ""]
    if "convergence" in images:
        m += [f"![convergence in paths]({images['convergence']})", ""]
    if "steps" in images:
        m += [f"![convergence in the time step]({images['steps']})", ""]
    m += _mutation(d, page)
    m += ["## Reproduce", "", "```bash", reproduce(d, page.name + "/"), "```", "", f"_{settings_line(d)}_", ""]
    return "\n".join(m)


def index_md(d: "Dossier") -> str:
    """The index: every case of the run, a row each, and the engine audits."""
    s = d.summary
    m = ["# Limit-behaviour dossier", "",
         f"{len(d.pages)} products, {s['total']} cases: {s['pass']} pass, {s['fail']} fail, {s['error']} error.", "",
         f"_{settings_line(d)}_", ""]
    rows = []
    for page in d.pages:
        for i, o in enumerate(page.outcomes):
            rows.append((f"[{page.name}]({page.slug}.md)" if i == 0 else "", o.case, o.kind, _value(o),
                         _reference(o), _num(o.z, 3), _num(o.p_adjusted, 3), o.verdict.upper()))
        if not page.outcomes:
            rows.append((f"[{page.name}]({page.slug}.md)", "-", "-", "-", "-", "-", "-",
                         "; ".join(page.errors) or "no cases"))
    m += [_table(("product", "case", "kind", "MC value ± SE", "reference", "z", "adjusted p", "verdict"), rows), ""]
    m += ["## Engine audits", "", f"_{d.audit_note or 'No audits were run.'}_", ""]
    for label, outs in d.audits.items():
        m += [f"### {label}", "", _audits(outs), ""]
    m += ["```bash", reproduce(d), "```", ""]
    return "\n".join(m)
