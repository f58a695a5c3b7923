"""Ctrl-C while the command starts, and the sizing rule of a run (limitcase.sizing)."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from click.testing import CliRunner

from limitcase import ParamError, checks_for, run_checks
from limitcase.cli import main
from limitcase.settings import PATH_DATES_PER_SECOND
from limitcase.sizing import enforce, estimate_run

from .test_catalogue import GOOD, GOOD_ROW


def _command() -> list[str]:
    exe = Path(sys.executable).with_name("limitcase")
    return [str(exe)] if exe.exists() else [sys.executable, "-c", "from limitcase_launch import run; run()"]


def test_ctrl_c_while_the_command_starts_prints_one_line_and_exits_130():
    """Before: a Ctrl-C while the library imported (numpy, scipy, sympy: seconds on a busy
    machine) printed Python's traceback. The interrupt lands 0.3 s after start, well inside the
    imports (the entry module imports nothing itself)."""
    proc = subprocess.Popen([*_command(), "check", "--workers", "1"], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    time.sleep(0.3)
    proc.send_signal(signal.SIGINT)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, (proc.returncode, err)
    assert "Traceback" not in err and "KeyboardInterrupt" not in err, err
    assert [line for line in err.splitlines() if line.strip()] == ["limitcase: interrupted"]


def test_the_entry_module_imports_nothing_heavy():
    code = "import sys, limitcase_launch; print(sorted(m for m in ('numpy', 'limitcase', 'click') if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60).stdout
    assert out.strip() == "[]"


def _good_checks():
    ns: dict = {}
    exec(compile(GOOD, "good.py", "exec"), ns)
    return checks_for(ns["GoodCall"])


def test_the_estimate_is_the_documented_rule():
    checks = _good_checks()  # one check: GoodCall and the European call, one date, one normal per step
    size = estimate_run(checks, paths=1_000_000, workers=2)
    assert size.checks == 1 and size.paths == 1_000_000
    assert size.work == pytest.approx(1_000_000 * 1 * (1 + 2))
    assert size.seconds == pytest.approx(size.work / PATH_DATES_PER_SECOND / 2)
    # under --precision the budget is what may be spent
    assert estimate_run(checks, paths=1000, max_paths=4_000_000).paths == 4_000_000


def test_a_run_estimated_above_the_limit_is_refused_before_any_work_unless_allowed(monkeypatch):
    checks = _good_checks()
    with pytest.raises(ParamError) as err:
        run_checks(checks, paths=10**14, workers=1)
    assert "run refused before it started" in str(err.value) and "allow_long_run=True" in str(err.value)
    assert "100,000,000,000,000 paths" in str(err.value)
    import limitcase.sizing as sizing

    monkeypatch.setattr(sizing, "RUN_WARN_SECONDS", 0.0)
    with pytest.warns(RuntimeWarning, match="a long run"):
        r = run_checks(checks, paths=1000, workers=1, method="plain")
    assert r.outcomes[0].verdict == "pass"
    monkeypatch.setattr(sizing, "RUN_REFUSE_SECONDS", 0.0)
    with pytest.raises(ParamError):
        run_checks(checks, paths=1000, workers=1, method="plain")
    assert run_checks(checks, paths=1000, workers=1, method="plain", allow_long_run=True).ok
    assert enforce(estimate_run(checks, paths=10), allow_long_run=True) is not None


def test_the_command_warns_above_an_hour_and_refuses_above_a_week(tmp_path, monkeypatch):
    import limitcase.sizing as sizing

    (tmp_path / "good.py").write_text(GOOD)
    monkeypatch.setattr(sizing, "RUN_WARN_SECONDS", 0.0)
    r = CliRunner().invoke(main, ["check", str(tmp_path), "--paths", "1000", "--workers", "1"])
    assert r.exit_code == 0, r.output
    assert "warning: a long run: 2 checks at 1,000 paths each are estimated at" in r.stderr  # the case and its interior point
    assert GOOD_ROW.search(r.output)
    monkeypatch.setattr(sizing, "RUN_REFUSE_SECONDS", 0.0)
    r = CliRunner().invoke(main, ["check", str(tmp_path), "--paths", "1000", "--workers", "1"])
    assert r.exit_code == 2 and "run refused before it started" in r.output and "--allow-long-run" in r.output
    assert not GOOD_ROW.search(r.output)
    r = CliRunner().invoke(main, ["check", str(tmp_path), "--paths", "1000", "--workers", "1", "--allow-long-run"])
    assert r.exit_code == 0 and GOOD_ROW.search(r.output)
