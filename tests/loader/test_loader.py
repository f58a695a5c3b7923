"""Loading products and models from a user's folders: nothing in a folder can end the run,
what is not product code is not imported, a file that does not import is an error for that
file only, and classes of one name in two files are told apart."""

from __future__ import annotations

import re
import textwrap
from pathlib import Path

import pytest
from click.testing import CliRunner

from limitcase.cli import main
from limitcase.errors import InputError
from limitcase.loader import LoadFailure, load_models, load_products, qualified_names

CALL = """
from limitcase_payoffs.vanilla import EuropeanCall


class {name}(EuropeanCall):
    '''A user's call.'''
"""

BOOM = "raise SystemExit(3)\n"


def _write(root: Path, rel: str, text: str) -> Path:
    p = root / rel
    p.parent.mkdir(parents=True, exist_ok=True)
    p.write_text(textwrap.dedent(text))
    return p


def _check(*args):
    # the declared checks only (these tests count them): interior points are tested in tests/engine
    return CliRunner().invoke(main, ["check", *map(str, args), "--paths", "4096", "--workers", "1",
                                     "--inner-points", "0"])


def test_a_file_calling_sys_exit_at_import_does_not_end_the_run(tmp_path):
    _write(tmp_path, "a_call.py", CALL.format(name="UserCall"))
    _write(tmp_path, "quits.py", "import sys\nsys.exit(0)\n")
    r = _check(tmp_path, "--select", "UserCall/put_call_parity")
    assert r.exit_code == 1, r.output
    assert "quits.py/import: " in r.output and "quits.py:2: the file does not import: it calls sys.exit(0)" in r.output
    assert re.search(r"^UserCall\s+put_call_parity\s.*PASS$", r.output, re.M)
    assert "2 pass" in r.output and "1 error" in r.output and "Traceback" not in r.output  # the check, the model's audit


def test_what_is_not_product_code_is_not_imported(tmp_path):
    _write(tmp_path, "mine.py", CALL.format(name="Mine"))
    for rel in (".hidden/x.py", "venv/lib/y.py", "__pycache__/z.py", "lib/site-packages/w.py", "setup.py",
                "conftest.py", "test_mine.py", "mine_test.py", "_private.py", "deep/.cache/v.py"):
        _write(tmp_path, rel, BOOM)
    (tmp_path / "venv" / "pyvenv.cfg").write_text("home = /usr/bin\n")
    failures: list[LoadFailure] = []
    found = load_products([tmp_path], failures=failures)
    assert [c.__name__ for c in found] == ["Mine"] and failures == []


def test_folders_are_searched_recursively(tmp_path):
    _write(tmp_path, "one/two/deep.py", CALL.format(name="Deep"))
    assert [c.__name__ for c in load_products([tmp_path])] == ["Deep"]


def test_one_file_that_does_not_import_is_an_error_for_that_file_only(tmp_path):
    _write(tmp_path, "good.py", CALL.format(name="Good"))
    _write(tmp_path, "bad.py", "import numpy\nx = 1 / 0\n")
    failures: list[LoadFailure] = []
    found = load_products([tmp_path], failures=failures)
    assert [c.__name__ for c in found] == ["Good"]
    assert len(failures) == 1 and "bad.py:2: the file does not import: ZeroDivisionError" in failures[0].message
    with pytest.raises(InputError, match=r"bad.py:2: the file does not import"):
        load_products([tmp_path])  # without failures=: the first one is raised, as before
    r = _check(tmp_path / "bad.py")
    assert r.exit_code == 2 and "bad.py:2: the file does not import" in r.output  # named on its own: bad input


def test_two_classes_of_one_name_are_told_apart(tmp_path, monkeypatch):
    _write(tmp_path, "desk_a/calls.py", CALL.format(name="Call"))
    _write(tmp_path, "desk_b/calls.py", CALL.format(name="Call"))
    _write(tmp_path, "desk_b/other.py", CALL.format(name="Unique"))
    monkeypatch.chdir(tmp_path)
    classes = load_products(["."])
    names = sorted(qualified_names(classes).values())
    assert names == ["Unique", "desk_a/calls.py::Call", "desk_b/calls.py::Call"]
    r = _check(".", "--select", "desk_b/calls.py::Call/put_call_parity", "--select", "Unique/put_call_parity")
    assert r.exit_code == 0, r.output
    assert "3 checks: 3 pass" in r.output and "desk_b/calls.py::Call" in r.output and "desk_a" not in r.output


def test_a_class_is_picked_from_a_file(tmp_path):
    f = _write(tmp_path, "two.py", CALL.format(name="First") + CALL.format(name="Second"))
    assert [c.__name__ for c in load_products([f"{f}:Second"])] == ["Second"]
    with pytest.raises(InputError, match=r"two.py: no Product class 'Third' defined there; its Product classes: First, Second"):
        load_products([f"{f}:Third"])


def test_a_file_may_import_a_helper_beside_it(tmp_path):
    _write(tmp_path, "desk_helpers.py", "SPOT = 100.0\n")
    _write(tmp_path, "uses_helper.py", "from desk_helpers import SPOT\n" + CALL.format(name="WithHelper"))
    assert [c.__name__ for c in load_products([tmp_path / "uses_helper.py"])] == ["WithHelper"]


def test_a_package_of_products_may_use_relative_imports(tmp_path):
    """A desk's products kept as a package (``__init__.py``, shared terms in a private module,
    ``from .terms import ...``) load as they import in the desk's own code."""
    _write(tmp_path, "desk/__init__.py", "")
    _write(tmp_path, "desk/_terms.py", "STRIKE = 95.0\n")
    _write(tmp_path, "desk/sub/__init__.py", "")
    _write(tmp_path, "desk/calls.py", "from ._terms import STRIKE\n" + CALL.format(name="DeskCall"))
    _write(tmp_path, "desk/sub/more.py", "from .._terms import STRIKE\n" + CALL.format(name="DeskCall2"))
    found = load_products([tmp_path / "desk"])
    assert sorted(c.__name__ for c in found) == ["DeskCall", "DeskCall2"]
    assert load_products([tmp_path / "desk" / "calls.py"]) == [c for c in found if c.__name__ == "DeskCall"]
    _write(tmp_path, "desk/broken.py", "from .missing import X\n")
    failures: list[LoadFailure] = []
    load_products([tmp_path / "desk"], failures=failures)
    assert len(failures) == 1 and "broken.py:1: the file does not import" in failures[0].message


def test_dates_that_raise_are_an_error_for_that_product_only(tmp_path):
    _write(tmp_path, "products.py", CALL.format(name="Fine") + """

class TypoInDates(EuropeanCall):
    def dates(self):
        return [self.maturty]
""")
    r = _check(tmp_path, "--select", "put_call_parity")
    assert r.exit_code == 1, r.output
    assert "ERROR TypoInDates/put_call_parity: TypoInDates.dates() raised AttributeError:" in r.output
    assert "products.py:" in r.output and "2 pass" in r.output and "Traceback" not in r.output


def test_models_are_found_like_products(tmp_path):
    _write(tmp_path, "m.py", """
from limitcase.models import BlackScholes


class Calm(BlackScholes):
    pass
""")
    _write(tmp_path, "quits.py", "import sys\nsys.exit(0)\n")
    failures: list[LoadFailure] = []
    assert [c.__name__ for c in load_models([tmp_path], failures=failures)] == ["Calm"]
    assert "calls sys.exit(0)" in failures[0].message
