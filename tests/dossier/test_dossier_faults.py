"""The dossier and the report writers: honest pictures and badges, no stale pages, no lost
or partial output files, one JSON number rule, and report/ rendering only."""

from __future__ import annotations

import ast
import json
import math
import os
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from limitcase.cli import main
from limitcase.document import build_dossier
from limitcase.document.records import SweepSeries
from limitcase.loader import load_products
from limitcase.report.jsonfile import dumps, jsonable, outcomes_document, write_json
from limitcase.report.markup import rest_to_html, rest_to_markdown
from limitcase.report.plots import path_labels, sweep_style
from limitcase.suite import RunResult
from limitcase.sweep import plan_sweep

HERE = Path(__file__).resolve().parent
SRC = HERE.parents[1] / "src" / "limitcase"

MARKED_UP = '''
import numpy as np
from limitcase import Param, Product, Reduction
from limitcase_payoffs.vanilla import EuropeanCall


class MarkedUpCall(EuropeanCall):
    """Pays ``max(S_T - K, 0)`` at *maturity*, **once**: see :class:`~limitcase.Product`
    and :math:`e^{-rT}`.

    Limits::

        none declared here
    """

    reductions = ()
    relations = ()
'''


def _catalogue(name: str) -> type:
    return next(c for c in load_products(()) if c.__name__ == name)


# -- sweeps of whole-number parameters --------------------------------------------------


def test_a_flag_keeps_its_value_until_the_limit_and_the_count_is_swept():
    cls = _catalogue("FloatingLookbackCall")
    red = next(r for r in cls.reductions if r.name == "continuous_one_date")
    plan = plan_sweep(cls(), red)
    assert plan.param == "observations"  # not the 0/1 flag
    finite = plan.points[:-1]
    assert [p["continuous"] for p in finite] == [0] * len(finite)  # the flag is set, not swept
    assert plan.points[-1]["continuous"] == 1
    values = [p["observations"] for p in plan.points]
    assert values == sorted(set(values), reverse=True)  # no repeated axis value


def test_a_flag_alone_is_two_points_drawn_apart():
    cls = _catalogue("Autocallable")
    red = next(r for r in cls.reductions if r.name == "quadrature_no_memory")
    plan = plan_sweep(cls(), red)
    assert plan.values == (1, 0)
    assert sweep_style(SweepSeries("A", "c", "memory", plan.points, discrete=True)) == "o"
    assert sweep_style(SweepSeries("A", "c", "barrier", plan.points, discrete=False)) == "o-"


# -- docstrings ---------------------------------------------------------------------------


def test_rest_markup_is_rendered_not_shown():
    doc = ("Pays ``max(S - K, 0)`` at *T*; see :func:`~limitcase.references.bs_call`, **twice**.\n\n"
           "* one ``x``\n* two\n\nAs code::\n\n    a = 1\n")
    h = rest_to_html(doc)
    for raw in ("``", ":func:", "::", "**"):
        assert raw not in h, raw
    assert "<code>max(S - K, 0)</code>" in h and "<em>T</em>" in h and "<code>bs_call</code>" in h
    assert "<strong>twice</strong>" in h and "<li>one <code>x</code></li>" in h and "<pre>a = 1</pre>" in h
    md = rest_to_markdown(doc)
    assert md.startswith("Pays `max(S - K, 0)` at *T*; see `bs_call`, **twice**.")
    assert ":func:" not in md and "```text\na = 1\n```" in md


# -- mutation scores, stale pages, markup on a page ----------------------------------------


def _mutate_json(path: Path, score: float) -> Path:
    caught = round(score * 25)
    doc = {"tool": "limitcase", "command": "mutate", "score": score, "mutants": [],
           "products": [{"product": "MarkedUpCall", "module": "m", "family": "f", "mutants": 25, "caught": caught,
                         "error": 0, "survived": 25 - caught, "equivalent": 0, "discarded": 0, "score": score}]}
    path.write_text(json.dumps(doc))
    return path


@pytest.fixture(scope="module")
def marked_up(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("marked")
    (folder / "marked_up.py").write_text(MARKED_UP)
    return folder / "marked_up.py"


def _report(*args: str):
    return CliRunner().invoke(main, ["report", "--paths", "1024", "--points", "2", "--no-audits", *args])


def test_a_score_without_threshold_is_not_a_red_fail(tmp_path, marked_up):
    m = _mutate_json(tmp_path / "m.json", 0.96)
    r = _report(str(marked_up), "-o", str(tmp_path / "d"), "--mutations", str(m))
    assert r.exit_code == 0, r.output
    page = (tmp_path / "d" / "MarkedUpCall.html").read_text()
    section = page[page.index("Mutation testing"):]
    assert "96.0%" in section and "badge fail" not in section and "badge info" in section
    assert "badge fail" not in (tmp_path / "d" / "index.html").read_text()
    # with a threshold the score is judged, and the colour agrees with the exit status
    r = _report(str(marked_up), "-o", str(tmp_path / "e"), "--mutations", str(m), "--min-score", "0.99")
    assert r.exit_code == 1, r.output
    assert "FAIL MarkedUpCall mutation score 96.0% below the required 99.0%" in r.output
    assert "badge fail" in (tmp_path / "e" / "MarkedUpCall.html").read_text()
    r = _report(str(marked_up), "-o", str(tmp_path / "f"), "--mutations", str(m), "--min-score", "0.9")
    assert r.exit_code == 0, r.output
    assert "--min-score" in _report(str(marked_up), "-o", str(tmp_path / "g"), "--min-score", "0.9").output


def test_a_page_shows_the_docstring_without_raw_markup(tmp_path, marked_up):
    r = _report(str(marked_up), "-o", str(tmp_path))
    assert r.exit_code == 0, r.output
    page = (tmp_path / "MarkedUpCall.html").read_text()
    doc = page[page.index('<div class="doc">'):page.index("</div>", page.index('<div class="doc">'))]
    assert "<code>max(S_T - K, 0)</code>" in doc and "<em>maturity</em>" in doc and "<code>Product</code>" in doc
    assert "``" not in doc and ":class:" not in doc and ":math:" not in doc
    md = (tmp_path / "MarkedUpCall.md").read_text()
    assert "`max(S_T - K, 0)`" in md and ":class:" not in md


def test_a_reused_folder_loses_only_the_pages_the_tool_wrote_before(tmp_path, marked_up):
    out = tmp_path / "d"
    out.mkdir()
    (out / "notes.html").write_text("mine")
    (out / "img").mkdir()
    (out / "img" / "logo.png").write_bytes(b"mine")
    formulas = str(HERE / "formula_products.py")
    r = _report(formulas, str(marked_up), "-o", str(out), "--select", "CallWithFormula", "--select", "MarkedUp")
    assert r.exit_code == 0, r.output
    assert (out / "CallWithFormula.html").is_file() and (out / "img" / "CallWithFormula-formula.png").is_file()
    r = _report(formulas, str(marked_up), "-o", str(out), "--select", "MarkedUp")
    assert r.exit_code == 0, r.output
    assert not (out / "CallWithFormula.html").exists() and not (out / "CallWithFormula.md").exists()
    assert not (out / "img" / "CallWithFormula-formula.png").exists()
    assert (out / "MarkedUpCall.html").is_file() and "CallWithFormula" not in (out / "index.html").read_text()
    assert (out / "notes.html").read_text() == "mine" and (out / "img" / "logo.png").read_bytes() == b"mine"


# -- numbers ------------------------------------------------------------------------------


def test_path_counts_cannot_be_read_as_decimals():
    labels = path_labels([1024, 2048, 16384, 131072, 1048576])
    assert labels[0] == "1024" and labels[2] == "16\u2009384" and labels[4] == "1\u2009048\u2009576"
    assert not any("," in s or "." in s for s in labels)


def test_one_json_number_rule():
    doc = {"a": math.inf, "b": -math.inf, "c": math.nan, "d": [np.float64(np.inf), np.int64(3), np.bool_(True)],
           "e": (1.5, None, "inf")}
    assert jsonable(doc) == {"a": 1e308, "b": -1e308, "c": None, "d": [1e308, 3, True], "e": [1.5, None, "inf"]}
    assert json.loads(dumps(doc))["a"] == 1e308


def test_a_run_with_an_infinite_setting_is_written(tmp_path):
    result = RunResult([], paths=1000, seed=1, alpha=0.01, extra={"max_barrier": math.inf, "gap": np.float64(0.5)})
    path = tmp_path / "run.json"
    write_json(path, result)  # strict JSON has no Infinity: written as 1e308, not refused
    assert json.loads(path.read_text())["settings"]["max_barrier"] == 1e308
    assert outcomes_document(result)["settings"]["gap"] == 0.5


# -- output files ---------------------------------------------------------------------------


@pytest.mark.parametrize("command,option", [("check", "--json"), ("check", "--junit"), ("report", "--json"),
                                            ("report", "--junit"), ("report", "-o")])
def test_an_unwritable_output_is_refused_before_the_run(tmp_path, command, option):
    (tmp_path / "afile").write_text("")
    bad = str(tmp_path / "afile" / "x") if option == "-o" else str(tmp_path / "no" / "such" / "run.json")
    r = CliRunner().invoke(main, [command, str(HERE / "formula_products.py"), "--paths", "1000", option, bad])
    assert r.exit_code == 2, r.output
    assert bad in r.output and "Traceback" not in r.output
    assert "pass," not in r.output  # nothing was run


def test_a_folder_given_as_the_json_file_is_refused(tmp_path):
    r = CliRunner().invoke(main, ["check", str(HERE / "formula_products.py"), "--json", str(tmp_path)])
    assert r.exit_code == 2 and str(tmp_path) in r.output


def test_an_interrupted_write_leaves_the_previous_file(tmp_path, monkeypatch):
    path = tmp_path / "run.json"
    path.write_text("previous\n")
    os.chmod(path, 0o640)
    result = RunResult([], paths=1000, seed=1, alpha=0.01)

    def interrupted(src, dst):
        raise KeyboardInterrupt

    monkeypatch.setattr(os, "replace", interrupted)
    with pytest.raises(KeyboardInterrupt):
        write_json(path, result)
    assert path.read_text() == "previous\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run.json"]  # no partial file left
    monkeypatch.undo()
    write_json(path, result)
    assert json.loads(path.read_text())["summary"]["total"] == 0
    assert path.stat().st_mode & 0o777 == 0o640  # the file keeps its permissions


# -- progress ------------------------------------------------------------------------------


def test_progress_counts_every_stage_up_to_its_total():
    cls = _catalogue("UpAndOutCall")
    calls: list[tuple[int, int]] = []
    d = build_dossier([cls], paths=1024, seed=3, alpha=0.01, points=2, audits=True, audit_paths=1000,
                      progress=lambda done, total: calls.append((done, total)))
    n_checks = d.summary["total"]
    totals = {t for _, t in calls}
    assert totals == {n_checks + len(cls.reductions) + 2 + len(d.audits)}
    done = [k for k, _ in calls]
    assert done == sorted(done) and done[-1] == totals.pop()
    assert len(set(done)) >= len(cls.reductions) + 2 + len(d.audits)  # every stage ticks


# -- the layers --------------------------------------------------------------------------------

ALLOWED = {"limitcase.errors", "limitcase.report", "limitcase.encoding", "limitcase.settings"}
"""What report/ may import at run time: errors, itself, the JSON number encoding and the
settings (defaults and the reproduce lines); none of them prices."""


def _runtime_imports(path: Path) -> set[str]:
    """Modules ``path`` imports when it runs (``if TYPE_CHECKING:`` blocks left out), with
    relative imports resolved inside limitcase.report."""
    tree = ast.parse(path.read_text())
    skip: set[int] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            skip.update(id(n) for b in node.body for n in ast.walk(b))
    found = set()
    for node in ast.walk(tree):
        if id(node) in skip:
            continue
        if isinstance(node, ast.Import):
            found.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level == 0:
                found.add(node.module or "")
            else:
                base = ["limitcase", "report"][: 3 - node.level]
                mod = ".".join(base + ([node.module] if node.module else []))
                found.update(f"{mod}.{a.name}" if not node.module else mod for a in node.names)
    return found


def test_report_imports_nothing_that_prices():
    files = sorted((SRC / "report").glob("*.py"))
    assert len(files) >= 8
    for f in files:
        for mod in _runtime_imports(f):
            if mod.startswith("limitcase"):
                assert any(mod == a or mod.startswith(a + ".") for a in ALLOWED), (f.name, mod)


def test_no_module_of_this_layer_is_long():
    for f in [*(SRC / "report").glob("*.py"), *(SRC / "document").glob("*.py"), SRC / "sweep.py",
              SRC / "symbolic.py", SRC / "cli.py", SRC / "commands" / "report.py", SRC / "commands" / "listing.py"]:
        assert len(f.read_text().splitlines()) <= 600, f
