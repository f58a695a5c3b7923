"""The way docs/product-api.md tells a team to import its own payoffs package from its
tests ("Importing your own payoffs package from tests") works, beside the plugin's items:
a package with an ``__init__.py`` and pytest's own ``pythonpath`` ini option, no path hack."""

from __future__ import annotations

import textwrap
from pathlib import Path

import pytest

pytest_plugins = ["pytester"]

DOC = Path(__file__).resolve().parents[2] / "docs" / "product-api.md"

PRODUCT = '''
import numpy as np

from limitcase import Param, Product, Reduction
from limitcase_payoffs.vanilla import PrepaidForward


class FloorNote(Product):
    """Pays max(S(T), floor) at T."""

    floor = Param(90.0, low=0.0, doc="least amount paid")
    maturity = Param(1.0, low=0.0, low_open=True, high=np.inf, high_open=True, doc="years")

    reductions = (
        Reduction("no_floor", {"floor": 0.0},
                  becomes=lambda p: PrepaidForward(maturity=p.maturity)),
    )

    def dates(self):
        return np.array([self.maturity])

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1], self.floor)
'''

TEST = '''
from desk_payoffs.notes import FloorNote
from limitcase.testing import run_product


def test_floor_note_by_package_name():
    result = run_product(FloorNote, paths=8192)
    assert result.outcomes and result.ok
'''


def test_the_documented_ini_is_the_one_tested() -> None:
    text = DOC.read_text(encoding="utf-8")
    assert "pythonpath = .\nlimitcase_payoffs = desk_payoffs" in text and "desk_payoffs/__init__.py" in text


def test_own_package_imports_from_tests_with_pythonpath(pytester: pytest.Pytester) -> None:
    pytester.path.joinpath("desk_payoffs").mkdir()
    pytester.path.joinpath("desk_payoffs", "__init__.py").write_text("")
    pytester.path.joinpath("desk_payoffs", "notes.py").write_text(textwrap.dedent(PRODUCT))
    pytester.path.joinpath("tests").mkdir()
    pytester.path.joinpath("tests", "test_notes.py").write_text(textwrap.dedent(TEST))
    pytester.path.joinpath("pytest.ini").write_text(
        "[pytest]\ntestpaths = tests\npythonpath = .\nlimitcase_payoffs = desk_payoffs\nlimitcase_paths = 8192\n"
    )
    result = pytester.runpytest("-p", "no:hypothesispytest", "-rA")
    # the team's own test (imports by package name) and the plugin's item (the one
    # reduction); __init__.py is not collected as a product file
    result.assert_outcomes(passed=2)
    result.stdout.fnmatch_lines(["*test_notes.py::test_floor_note_by_package_name*",
                                 "*notes.py::FloorNote::no_floor*"])


def test_without_pythonpath_the_import_fails(pytester: pytest.Pytester) -> None:
    """The option is what makes it work (so the test above tests the documented way)."""
    pytester.path.joinpath("desk_payoffs").mkdir()
    pytester.path.joinpath("desk_payoffs", "__init__.py").write_text("")
    pytester.path.joinpath("desk_payoffs", "notes.py").write_text(textwrap.dedent(PRODUCT))
    pytester.path.joinpath("tests").mkdir()
    pytester.path.joinpath("tests", "test_notes.py").write_text(textwrap.dedent(TEST))
    pytester.path.joinpath("pytest.ini").write_text("[pytest]\ntestpaths = tests\n")
    result = pytester.runpytest("-p", "no:hypothesispytest")
    result.assert_outcomes(errors=1)
