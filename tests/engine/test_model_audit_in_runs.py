"""Every run of checks audits the martingale of its models first; a missing reference is a
skip. Headline cases through the command line at default settings.

The broken twin of the model is Black-Scholes whose drift is off by ``off`` a year
(``r - q + off - sigma^2/2``): the discounted asset then grows by ``exp(off t)``. The
model's forward (what the underlying control assumes) is still ``S0 exp(-qt)``, so with
controls most checks cannot see it; the run's own audit on plain paths must.
"""

from __future__ import annotations

import json
import math
import textwrap
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from click.testing import CliRunner

from limitcase import checks_for, run_checks
from limitcase.cli import main
from limitcase.models import BlackScholes
from limitcase.modelaudit import audit_paths_needed, plan_model_audits
from limitcase.settings import MODEL_AUDIT_DRIFT
from limitcase_payoffs.vanilla import EuropeanCall, EuropeanPut

PRODUCTS = '''
import math
import numpy as np
from limitcase.models import BlackScholes
from limitcase.models.base import Simulated
from limitcase_payoffs.vanilla import EuropeanCall, EuropeanPut


class DriftOff(BlackScholes):
    """Black-Scholes with the drift off by {off} a year (0: the correct model)."""

    def _simulate(self, times, z, rng):
        dt = np.diff(times, prepend=0.0)
        z *= (self.vol * np.sqrt(dt))[None, :, None]
        z += ((self.rate - self.dividend + {off} - 0.5 * self.vol**2) * dt)[None, :, None]
        np.cumsum(z, axis=1, out=z)
        z += math.log(self.spot)
        np.exp(z, out=z)
        return Simulated(s=z, step_var=(self.vol**2 * dt)[None, :, None])


class MyCall(EuropeanCall):
    def scenario(self):
        return DriftOff()


class MyPut(EuropeanPut):
    def scenario(self):
        return DriftOff()
'''


def _write(tmp_path, off: float):
    path = tmp_path / f"drift_{'off' if off else 'ok'}.py"
    path.write_text(PRODUCTS.replace("{off}", repr(off)))
    return path


def test_a_drift_off_by_twice_the_sized_error_fails_check_at_default_settings(tmp_path):
    """The audit is sized to see a drift off by MODEL_AUDIT_DRIFT (0.5% a year) with 90%
    power, so at one seed that error is missed one time in ten: over seeds 0-19 its z had
    mean 5.9 (sd 1.0) and missed at seed 3 (z 3.85); with the engine's blocks drawn dates
    first, mean 5.6 (sd 0.8), missed at seed 3 (3.45) and at the default seed (4.06, under
    the run's Holm level). Twice that error doubles the expected z (about 11): a miss is then
    beyond 6 standard deviations, so one seed can assert it."""
    path = _write(tmp_path, 2 * MODEL_AUDIT_DRIFT)
    out, junit = tmp_path / "run.json", tmp_path / "run.xml"
    r = CliRunner().invoke(main, ["check", str(path), "--workers", "1", "--json", str(out), "--junit", str(junit)])
    assert r.exit_code == 1, r.output
    doc = json.loads(out.read_text())
    audits = [c for c in doc["cases"] if c["kind"] == "audit"]
    assert len(audits) == 1 and audits[0]["verdict"] == "fail" and audits[0]["case"] == "martingale"
    assert audits[0]["product"] == "DriftOff" and audits[0]["method"] == "plain" and audits[0]["controls"] == []
    assert audits[0]["p_adjusted"] is not None  # in the run's Holm family
    checks = [c for c in doc["cases"] if c["kind"] != "audit"]
    assert checks and all(c["model_audit"] == "fail" for c in checks)
    assert all("failed its martingale audit" in c["message"] for c in checks)
    assert "DriftOff/martingale" in doc["settings"]["model_audits"]
    assert "audit" in r.output and "failed its martingale audit" in r.output
    cases = ET.parse(junit).getroot().iter("testcase")
    assert any(c.get("classname") == "audit.DriftOff" and c.find("failure") is not None for c in cases)


def test_the_correct_model_passes_check_at_default_settings(tmp_path):
    path = _write(tmp_path, 0.0)
    out = tmp_path / "run.json"
    r = CliRunner().invoke(main, ["check", str(path), "--workers", "1", "--json", str(out)])
    assert r.exit_code == 0, r.output
    doc = json.loads(out.read_text())
    audits = [c for c in doc["cases"] if c["kind"] == "audit"]
    assert len(audits) == 1 and audits[0]["verdict"] == "pass"
    assert all(c["model_audit"] == "pass" for c in doc["cases"] if c["kind"] != "audit")


NO_REFERENCE = '''
import numpy as np
from limitcase import Param, Product, Reduction
from limitcase.errors import NoReference


class PowerPayoff(Product):
    """max(S - K, 0)^1.5: no closed form here (a stand-in for a base without a reference)."""
    strike = Param(100.0, low=0.0)
    def dates(self):
        return np.array([1.0])
    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] - self.strike, 0.0) ** 1.5
    def reference(self, model):
        raise NoReference("no closed form for a call to the power 1.5")


class CappedPower(Product):
    cap = Param(50.0, low=0.0, high=float("inf"))
    strike = Param(100.0, low=0.0)
    def dates(self):
        return np.array([1.0])
    def payoff(self, obs):
        return np.minimum(np.maximum(obs.s[:, -1] - self.strike, 0.0) ** 1.5, self.cap)
    reductions = (Reduction("no_cap", {"cap": float("inf")}, becomes=lambda p: PowerPayoff(strike=p.strike)),)
'''


def test_a_base_without_reference_is_a_skip_with_its_path_by_path_part_checked(tmp_path):
    path = tmp_path / "capped.py"
    path.write_text(NO_REFERENCE)
    out, junit = tmp_path / "run.json", tmp_path / "run.xml"
    r = CliRunner().invoke(main, ["check", str(path), "--workers", "1", "--json", str(out), "--junit", str(junit),
                                  "--inner-points", "0"])  # the declared checks, counted below
    assert r.exit_code == 0, r.output
    assert "3 checks: 2 pass, 0 fail, 0 error, 1 skip" in r.output  # the legs, the skip, the model audit
    assert "SKIP CappedPower/no_cap: no reference for the base case" in r.output
    doc = json.loads(out.read_text())
    by = {c["case"]: c for c in doc["cases"]}
    assert by["no_cap"]["verdict"] == "skip" and by["no_cap"]["p_adjusted"] is None
    assert by["no_cap:legs"]["verdict"] == "pass" and by["no_cap:legs"]["pathwise_ok"] is True
    assert doc["summary"] == {"pass": 2, "fail": 0, "error": 0, "skip": 1, "total": 3}
    suite = ET.parse(junit).getroot().find("testsuite")
    assert suite.get("skipped") == "1"
    skipped = [c for c in suite.iter("testcase") if c.find("skipped") is not None]
    assert [c.get("name") for c in skipped] == ["no_cap"]
    assert "no closed form" in skipped[0].find("skipped").get("message")


def test_the_legs_still_catch_a_broken_limit_when_the_reference_is_missing(tmp_path):
    """The capped product's exponent mistyped (1.25 for 1.5): at the limit it no longer pays
    the base on every path, and the path-by-path part fails although the reference is missing."""
    path = tmp_path / "capped_bug.py"
    path.write_text(NO_REFERENCE.replace("np.minimum(np.maximum(obs.s[:, -1] - self.strike, 0.0) ** 1.5, self.cap)",
                                         "np.minimum(np.maximum(obs.s[:, -1] - self.strike, 0.0) ** 1.25, self.cap)"))
    r = CliRunner().invoke(main, ["check", str(path), "--workers", "1"])
    assert r.exit_code == 1, r.output
    assert "FAIL CappedPower/no_cap:legs: path-by-path identity broken" in r.output


def test_audit_paths_follow_the_power_formula():
    """Under Black-Scholes ``v_t = exp(sigma^2 t) - 1`` exactly (lognormal variance): the
    sized path count is ``(z_{1-alpha/(2mL)} + z_{0.9})^2 v_t / (exp(delta t) - 1)^2`` at the
    best date, rounded up to blocks (common practice: the normal power of a z-test)."""
    from scipy.stats import norm

    dates = np.array([1 / 12, 0.25, 0.5, 1.0, 2.0])
    v = np.expm1(0.2**2 * dates)[:, None]
    n = audit_paths_needed(v, dates, alpha=0.01, family=100)
    q = norm.isf(0.01 / (2 * 100 * 5)) + norm.isf(0.1)
    expect = q * q * v[-1, 0] / math.expm1(MODEL_AUDIT_DRIFT * 2.0) ** 2
    assert expect <= n < expect + 4096


def test_models_are_audited_once_each_and_distinct_parameters_count():
    checks = checks_for(EuropeanCall, model=BlackScholes()) + checks_for(EuropeanPut, model=BlackScholes())
    checks += checks_for(EuropeanCall, model=BlackScholes(vol=0.3))
    plans = plan_model_audits(checks)
    assert [p.case for p in plans] == ["martingale:1", "martingale:2"]
    assert len(plans[0].checks) + len(plans[1].checks) == len(checks)
    result = run_checks(checks, paths=8192)
    assert sum(o.kind == "audit" for o in result.outcomes) == 2
    assert result.outcomes[-1].kind == "audit" and result.outcomes[0].kind != "audit"  # audits after the checks
    off = run_checks(checks, paths=8192, audit_models=False)
    assert not any(o.kind == "audit" for o in off.outcomes)


MODEL_FILE = '''
import math
import numpy as np
from limitcase.models import BlackScholes
from limitcase.models.base import Simulated


class DriftOff(BlackScholes):
    """Black-Scholes with the drift off by {off} a year (0: the correct model)."""

    def _simulate(self, times, z, rng):
        dt = np.diff(times, prepend=0.0)
        z *= (self.vol * np.sqrt(dt))[None, :, None]
        z += ((self.rate - self.dividend + {off} - 0.5 * self.vol**2) * dt)[None, :, None]
        np.cumsum(z, axis=1, out=z)
        z += math.log(self.spot)
        np.exp(z, out=z)
        return Simulated(s=z, step_var=(self.vol**2 * dt)[None, :, None])
'''


@pytest.mark.parametrize("off, code", [(0.005, 1), (0.0, 0)])
def test_check_with_a_user_model_file(tmp_path, off, code):
    """``limitcase check --model file.py:DriftOff`` at default settings: off by 0.5% a year
    fails (the run's audit), the correct model passes."""
    from pathlib import Path

    model = tmp_path / "drift_model.py"
    model.write_text(MODEL_FILE.replace("{off}", repr(off)))
    vanilla = Path(__file__).resolve().parents[2] / "payoffs" / "vanilla.py"
    out = tmp_path / "run.json"
    r = CliRunner().invoke(main, ["check", str(vanilla), "--model", f"{model}:DriftOff", "--workers", "1",
                                  "--json", str(out), "--inner-points", "0"])
    assert r.exit_code == code, r.output
    audits = [c for c in json.loads(out.read_text())["cases"] if c["kind"] == "audit"]
    assert {a["product"] for a in audits} == {"DriftOff"}
    assert all(a["verdict"] == ("fail" if off else "pass") for a in audits)
