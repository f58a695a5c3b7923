"""The bad-input catalogue: one case per input a new user may give, each run through the
command line, with the exit code it must end with, no traceback, a message naming what is
wrong and where, and, where the input is one product among others, the other products'
results still reported.

Every product here is invented for the test; the good product's check is a path-by-path
reduction to the European call (reference: Black-Scholes, common practice), which a correct
payoff passes at any seed.
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
import textwrap
from dataclasses import dataclass, field
from pathlib import Path

import pytest
from click.testing import CliRunner

from limitcase.cli import main

GOOD = """
import numpy as np
from limitcase import Param, Product, Reduction
from limitcase_payoffs.vanilla import EuropeanCall


class GoodCall(Product):
    strike = Param(100.0, low=0.0)
    maturity = Param(1.0, low=0.0, low_open=True)
    reductions = (Reduction("same", {}, becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity)),)

    def dates(self):
        return np.array([self.maturity])

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] - self.strike, 0.0)
"""

# a product whose dates() and payoff() bodies each case fills
BAD = """
import math
import numpy as np
from limitcase import Bound, Monotone, Param, Product, Reduction
from limitcase_payoffs.vanilla import EuropeanCall


class Bad(Product):
    strike = Param(100.0, low=0.0)
    maturity = Param(1.0, low=0.0, low_open=True)
    reductions = (Reduction("same", {{}}, becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity)),)

    def dates(self):
        {dates}

    def payoff(self, obs):
        x = np.maximum(obs.s[:, -1] - self.strike, 0.0)
        {payoff}
"""

BERMUDAN = """
import numpy as np
from limitcase import Param, Product, Reduction
from limitcase_payoffs.vanilla import EuropeanPut


class BadBermudan(Product):
    strike = Param(100.0, low=0.0)
    reductions = (Reduction("one_date", {{}}, becomes=lambda p: EuropeanPut(strike=p.strike, maturity=1.0),
                            allowance=1.0, exact=False),)

    def dates(self):
        return np.array([0.5, 1.0])

    def exercise_dates(self):
        return np.array([0.5, 1.0])

    def exercise_value(self, obs):
        {exercise}

    def regression_state(self, obs, j):
        {state}
"""


def bad(dates: str = "return np.array([self.maturity])", payoff: str = "return x") -> str:
    return BAD.format(dates=dates, payoff=payoff)


def product_file(body: str, name: str, base: str = "Product") -> str:
    return f"""
import numpy as np
from limitcase import Bound, Monotone, Param, Product, Reduction


class {name}({base}):
    strike = Param(100.0, low=0.0)
{textwrap.indent(textwrap.dedent(body), '    ')}
    def dates(self):
        return np.array([1.0])

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] - self.strike, 0.0)
"""


BOOM = "raise SystemExit(3)\n"


@dataclass(frozen=True)
class Case:
    """One bad input: the files of a checked folder (the good product is always there unless
    ``good`` is False), extra arguments, the exit code, the fragments the output must hold
    (what and where), and whether the good product's result must still be reported."""

    id: str
    files: dict = field(default_factory=dict)
    args: tuple = ()
    code: int = 1
    says: tuple = ()
    good: bool = True
    others: bool = True
    command: str = "check"
    subprocess: bool = False
    xfail: str = ""


TOLD = "{folder}"  # replaced by the checked folder in the expected fragments

CASES = [
    # -- a product's own code returns garbage or raises: an error of its check, the rest runs
    Case("dates_raise", {"bad.py": bad(dates="return np.array([self.maturty])")},
         says=("Bad/same", "dates() raised AttributeError", "maturty", "bad.py:")),
    Case("dates_strings", {"bad.py": bad(dates="return ['soon', 'later']")},
         says=("Bad/same", "dates() did not return numbers", "soon")),
    Case("dates_none", {"bad.py": bad(dates="pass")}, says=("Bad/same", "dates() returned None")),
    Case("dates_a_million", {"bad.py": bad(dates="return np.arange(1, 1_000_001) / 1_000_000")},
         says=("Bad/same", "1,000,000 observation dates", "GiB", "MAX_CASE_BYTES")),
    Case("payoff_strings", {"bad.py": bad(payoff="return np.array(['a'] * obs.paths)")},
         says=("Bad/same", "Bad.payoff returned strings", "'a'", "expected floats")),
    Case("payoff_none", {"bad.py": bad(payoff="x = x")},
         says=("Bad/same", "Bad.payoff returned None", "expected")),
    Case("payoff_complex", {"bad.py": bad(payoff="return x + 1j * x")},
         says=("Bad/same", "complex numbers with a non-zero imaginary part", "expected floats")),
    Case("payoff_integers", {"bad.py": bad(payoff="return x.astype(int)")},
         says=("Bad/same", "Bad.payoff returned integers", "int64", "astype(float)")),
    Case("payoff_wrong_shape", {"bad.py": bad(payoff="return x[:, None, None]")},
         says=("Bad/same", "Bad.payoff returned shape", ", 1, 1)", "expected")),
    Case("payoff_nan", {"bad.py": bad(payoff="return x * np.nan")},
         says=("Bad/same", "Bad.payoff returned NaN or inf", "first at path 0")),
    Case("payoff_objects", {"bad.py": bad(payoff="return [None] * obs.paths")},
         says=("Bad/same", "Bad.payoff returned objects that are not numbers", "None")),
    Case("payoff_raises", {"bad.py": bad(payoff="return x / obs.no_such_field")},
         says=("Bad/same", "Bad.payoff raised AttributeError", "no_such_field")),
    Case("exercise_value_strings",
         {"berm.py": BERMUDAN.format(exercise="return np.full((obs.paths, 2), 'x')",
                                     state="return obs.s[:, :1]")},
         says=("BadBermudan/one_date", "BadBermudan.exercise_value returned strings")),
    Case("regression_state_raises",  # raised in the Longstaff-Schwartz set-up, a bare ValueError
         {"berm.py": BERMUDAN.format(exercise="return np.maximum(100.0 - obs.s, 0.0)",
                                     state="raise ValueError('no state here')")},
         says=("BadBermudan/one_date", "ValueError: no state here", "berm.py:")),
    # -- files of a checked folder
    Case("sys_exit_at_import", {"quits.py": "import sys\nsys.exit(0)\n"},
         says=("quits.py:2", "sys.exit(0)"), subprocess=True),
    Case("file_that_does_not_import", {"broken.py": "x = (\n"},
         says=("broken.py:1", "SyntaxError")),
    Case("hidden_venv_setup_conftest_tests_skipped",
         {".hidden/p.py": BOOM, "venv/pyvenv.cfg": "home = /usr\n", "venv/lib/p.py": BOOM,
          "setup.py": BOOM, "conftest.py": BOOM, "test_p.py": BOOM, "p_test.py": BOOM, "_private.py": BOOM},
         code=0, says=("pass, 0 fail, 0 error",)),
    Case("two_classes_of_one_name",
         {"a/twin.py": product_file("relations = (Monotone('strike', -1, to=120.0),)\n", "Twin"),
          "b/twin.py": product_file("relations = (Monotone('strike', -1, to=110.0),)\n", "Twin")},
         code=0, says=("a/twin.py::Twin", "b/twin.py::Twin")),
    # -- declarations
    Case("bound_is_nan", {"nanb.py": product_file("relations = (Bound('below_nan', '<=', lambda p, m: math.nan),)\n"
                                                  , "NanBound").replace("import numpy", "import math\nimport numpy")},
         says=("NanBound/below_nan", "evaluates to NaN")),
    Case("becomes_returns_a_number",
         {"num.py": product_file("reductions = (Reduction('to_number', {'strike': 0.0}, becomes=lambda p: 42.0),)\n",
                                 "BecomesNumber")},
         says=("BecomesNumber/to_number", "becomes returned 42.0", "not a Product")),
    Case("relation_names_a_missing_parameter",
         {"miss.py": product_file("relations = (Monotone('strik', -1, to=110.0),)\n", "MissingParam")},
         says=("miss.py:", "MissingParam", "'strik'", "did you mean 'strike'")),
    Case("default_outside_its_range",
         {"dflt.py": product_file("spread = Param(-5.0, low=0.0)\n", "BadDefault")},
         says=("dflt.py", "BadDefault", "default of parameter 'spread'", "-5.0", "[0, inf]")),
    # -- run arguments and output paths
    Case("huge_paths", args=("--paths", "100000000000000"), code=2,
         says=("run refused before it started", "100,000,000,000,000 paths", "days", "--allow-long-run"),
         others=False),
    Case("unwritable_json", args=("--json", "{folder}/no/such/folder/out.json"), code=2,
         says=("out.json",), others=False),
    Case("unwritable_junit", args=("--junit", "{folder}/no/such/folder/out.xml"), code=2,
         says=("out.xml",), others=False),
    # -- quote files
    Case("missing_quotes_file", command="reprice", args=("{folder}/nope.csv",), code=2,
         says=("nope.csv", "does not exist"), good=False, others=False),
    Case("quotes_file_of_100_MB", command="reprice",
         files={"big.csv": None}, args=("{folder}/big.csv", "--spot", "100", "--rate", "0.03"), code=2,
         says=("big.csv", "100.0 MB"), good=False, others=False),
]

GOOD_ROW = re.compile(r"^GoodCall\s+same\s+reduction\s.*PASS\s*$", re.M)


def _materialise(case: Case, folder: Path) -> None:
    if case.good:
        (folder / "good.py").write_text(GOOD)
    for rel, text in case.files.items():
        p = folder / rel
        p.parent.mkdir(parents=True, exist_ok=True)
        if text is None:  # a sparse 100 MB quote file: quick to make, refused before it is read
            head = "expiry,strike,type,price\n" + "".join(f"0.5,{100 + i},call,{6.5 - i * 0.001:.3f}\n"
                                                          for i in range(5000))
            with open(p, "wb") as fh:
                fh.write(head.encode())
                fh.truncate(100_000_000)
        else:
            p.write_text(text)


def _run(case: Case, folder: Path) -> tuple[int, str]:
    args = [a.replace("{folder}", str(folder)) for a in case.args]
    if case.command == "check":
        argv = ["check", str(folder), "--paths", "1000", "--workers", "1", *args]
    else:
        argv = [case.command, *args]
    if case.subprocess:
        exe = Path(sys.executable).with_name("limitcase")
        cmd = [str(exe)] if exe.exists() else [sys.executable, "-c", "from limitcase_launch import run; run()"]
        proc = subprocess.run([*cmd, *argv], capture_output=True, text=True, timeout=300,
                              env={**os.environ, "CI": "1"})
        return proc.returncode, proc.stdout + proc.stderr
    result = CliRunner().invoke(main, argv)
    if result.exception is not None and not isinstance(result.exception, SystemExit):
        import traceback

        return -1, result.output + "".join(traceback.format_exception(result.exception))
    return result.exit_code, result.output


@pytest.mark.parametrize(
    "case",
    [pytest.param(c, id=c.id, marks=[pytest.mark.xfail(strict=False, reason=c.xfail)] if c.xfail else [])
     for c in CASES],
)
def test_bad_input(case: Case, tmp_path: Path) -> None:
    folder = tmp_path / case.id
    folder.mkdir()
    _materialise(case, folder)
    code, out = _run(case, folder)
    assert "Traceback" not in out, out
    assert code == case.code, out
    for fragment in case.says:
        assert fragment.replace("{folder}", str(folder)) in out, (fragment, out)
    if case.others:
        assert GOOD_ROW.search(out), f"the good product's result is missing:\n{out}"


def test_a_payoff_returning_strings_in_a_worker_process_is_its_check_error(tmp_path: Path) -> None:
    """The same garbage computed in a forked worker comes back as that check's error."""
    folder = tmp_path / "workers"
    folder.mkdir()
    (folder / "good.py").write_text(GOOD)
    (folder / "bad.py").write_text(bad(payoff="return np.array(['a'] * obs.paths)"))
    (folder / "berm.py").write_text(BERMUDAN.format(exercise="return np.maximum(100.0 - obs.s, 0.0)",
                                                    state="raise ValueError('no state here')"))
    r = CliRunner().invoke(main, ["check", str(folder), "--paths", "20000", "--workers", "2"])
    assert r.exception is None or isinstance(r.exception, SystemExit), r.exception
    assert r.exit_code == 1 and "Traceback" not in r.output
    assert "Bad.payoff returned strings" in r.output
    assert "ValueError: no state here" in r.output
    assert GOOD_ROW.search(r.output), r.output
