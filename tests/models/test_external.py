"""External simulators: a stand-alone script supplies the paths through limitcase's path
array file; the audits and a check run on it; each way a simulator can fail is a clear error
naming the command."""

from __future__ import annotations

import re
import struct
import sys
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from limitcase.cli import main
from limitcase.engine import evaluate
from limitcase.errors import DeclarationError, InputError, ModelError
from limitcase.models.external import ExternalModel, read_path_array, write_path_array
from limitcase.models.spec import resolve_model
from limitcase.params import Param

HERE = Path(__file__).parent / "external"
MODELS = HERE / "script_models.py"
SIM = HERE / "gbm_simulator.py"


def _model(cls_name="ScriptGBM", **over):
    spec = f"{MODELS}:{cls_name}" + (":" + ",".join(f"{k}={v}" for k, v in over.items()) if over else "")
    return resolve_model(spec)


def _broken(bug, timeout=30.0):
    base = type(_model())
    return type(f"Script_{bug.replace('-', '_')}", (base,), {"command": base.command + ("--bug", bug),
                                                               "timeout": timeout, "__module__": base.__module__})


# --- the file format ----------------------------------------------------------------------


def test_path_array_layout_is_the_documented_one(tmp_path):
    """Written by hand with struct (header <8sIIII, then float64 little-endian in C order:
    path, date, asset), read back as (paths, dates, assets)."""
    n, d, a = 2, 3, 2
    values = [float(i) + 0.5 for i in range(n * d * a)]
    f = tmp_path / "p.lcp"
    f.write_bytes(struct.pack("<8sIIII", b"LCPATHS1", n, d, a, 1) + struct.pack(f"<{len(values)}d", *values))
    s, v = read_path_array(f)
    assert v is None and s.shape == (2, 3, 2)
    assert s[1, 0, 1] == values[(1 * d + 0) * a + 1] and s[0, 2, 0] == values[4]


def test_write_then_read_round_trips_both_planes(tmp_path):
    rng = np.random.default_rng(1)
    s, v = rng.random((5, 4, 1)) + 1.0, rng.random((5, 4, 1))
    write_path_array(tmp_path / "x.lcp", s, v)
    s2, v2 = read_path_array(tmp_path / "x.lcp")
    assert np.array_equal(s, s2) and np.array_equal(v, v2)
    np.save(tmp_path / "y.npy", s[:, :, 0])
    s3, v3 = read_path_array(tmp_path / "y.npy")
    assert np.array_equal(s3, s) and v3 is None


def test_truncated_file_names_the_sizes(tmp_path):
    f = tmp_path / "t.lcp"
    f.write_bytes(struct.pack("<8sIIII", b"LCPATHS1", 10, 2, 1, 1) + b"\0" * 16)
    with pytest.raises(ModelError, match=r"10 paths x 2 dates x 1 assets x 1 plane\(s\), 184 bytes in all, but the file has 40"):
        read_path_array(f)


# --- the simulator as a model ---------------------------------------------------------------


def test_same_seed_same_numbers_and_blocks_differ():
    m = _model()
    t = [0.5, 1.0]
    a = evaluate_paths(m, t, seed=7)
    b = evaluate_paths(m, t, seed=7)
    c = evaluate_paths(m, t, seed=8)
    assert np.array_equal(a, b) and not np.array_equal(a, c)


def evaluate_paths(model, times, seed):
    gen = np.random.Generator(np.random.PCG64(seed))
    z = np.zeros((300, len(times), 1))
    return model.simulate(times, z, gen).s


def test_parameters_reach_the_simulator_and_replace_keeps_the_class():
    m = _model(vol=0.0, dividend=0.0)
    s = evaluate_paths(m, [0.5, 1.0], 3)
    assert np.allclose(s[:, :, 0], 100.0 * np.exp(0.05 * np.array([0.5, 1.0])), rtol=1e-13)
    r = m.replace(vol=0.3)
    assert type(r) is type(m) and r.vol == 0.3


def test_a_forward_is_priced_right_through_the_engine():
    """Discounted mean of S(1) against S0 exp(-q): Black and Scholes (1973), risk-neutral drift."""
    from limitcase.audits.probes import _Delivery

    m = _model()
    joint = evaluate([_Delivery("S(1)", [1.0], 1, [0])], m, paths=8192, seed=5, method="plain")
    est = joint.estimate([1.0])
    assert abs(est.value - 100.0 * np.exp(-0.02)) < 4.0 * est.stderr


@pytest.mark.parametrize("bug, message", [
    ("exit", r"exited with status 3 \(.*gbm_simulator.py.*\); its standard error ends: gbm_simulator: cannot open"),
    ("shape", r"wrote prices of shape \(paths, dates, assets\) = \(299, 2, 1\); expected \(300, 2, 1\)"),
    ("nan", r"wrote 1 NaN or infinite price\(s\); the first at path 150, date 0.5 \(column 0\)"),
    ("header", r"wrote a bad file: .* does not start with LCPATHS1"),
])
def test_a_failing_simulator_is_an_error_naming_the_command(bug, message):
    m = _broken(bug)()
    with pytest.raises(ModelError, match=message) as info:
        evaluate_paths(m, [0.5, 1.0], 1)
    assert "--bug" in str(info.value) and type(m).__name__ in str(info.value)


def test_a_simulator_that_hangs_is_stopped_by_its_timeout():
    m = _broken("sleep", timeout=1.0)()
    with pytest.raises(ModelError, match=r"did not finish within 1 s \(.*gbm_simulator.py.*\); raise .*timeout"):
        evaluate_paths(m, [1.0], 1)


def test_a_missing_command_is_named():
    class Missing(ExternalModel):
        command = ("no-such-simulator-xyz", "--out", "{output}")
        spot = Param(100.0, low=0.0, low_open=True)
        rate = Param(0.05)
        dividend = Param(0.0)

    with pytest.raises(ModelError, match=r"Missing: the simulator command cannot be started: 'no-such-simulator-xyz' not found"):
        evaluate_paths(Missing(), [1.0], 1)


@pytest.mark.parametrize("attrs, message", [
    ({"command": "sim --out {output}"}, r"command is one string .* give a tuple of arguments"),
    ({"command": ("sim", "{outptu}")}, r"unknown placeholder \{outptu\}"),
    ({"command": ("sim", "{seed}")}, r"never names \{output\}"),
    ({"command": ("sim", "{output}"), "timeout": 0}, r"timeout = 0"),
])
def test_declaration_errors_name_file_class_and_fix(attrs, message):
    body = {"spot": Param(100.0, low=0.0, low_open=True), "rate": Param(0.05), "dividend": Param(0.0), **attrs}
    with pytest.raises(DeclarationError, match=r"test_external.py(:\d+)?: model class Bad: .*" + message):
        type("Bad", (ExternalModel,), {"__module__": __name__, **body})


# --- through the command line -----------------------------------------------------------------


def test_the_correct_simulator_passes_every_audit():
    r = CliRunner().invoke(main, ["audit", f"{MODELS}:ScriptGBM", "--paths", "20000"])
    assert r.exit_code == 0, r.output
    for case in ("martingale", "paths", "seeds", "steps_flat", "steps_limit", "degenerations:no_dividend"):
        assert f"ScriptGBM  {case}" in r.output


def test_the_simulator_without_the_dividend_is_caught_by_audit_at_default_paths():
    r = CliRunner().invoke(main, ["audit", f"{MODELS}:ScriptGBMNoDividend", "--only", "martingale"])
    assert r.exit_code == 1, r.output
    assert "FAIL ScriptGBMNoDividend/martingale" in r.output


def test_a_check_runs_under_the_simulator():
    r = CliRunner().invoke(main, ["check", "payoffs/vanilla.py", "--model", f"{MODELS}:ScriptGBM",
                                  "--select", "EuropeanCall/put_call_parity", "--select", "EuropeanPut/increasing",
                                  "--paths", "8192", "--workers", "1", "--inner-points", "0"])
    assert r.exit_code == 0, r.output
    assert "3 checks: 3 pass" in r.output  # two checks and the run's audit of the simulator


def test_a_failing_simulator_fails_the_audit_naming_the_command():
    r = CliRunner().invoke(main, ["audit", f"{MODELS}:ScriptExits", "--only", "martingale", "--paths", "20000"])
    assert r.exit_code == 1, r.output
    assert "ERROR ScriptExits/martingale: ScriptExits: the simulator command exited with status 3" in r.output
    assert "gbm_simulator.py" in r.output and "cannot open the volatility surface" in r.output
    assert "Traceback" not in r.output


def test_same_numbers_whatever_the_number_of_workers(tmp_path):
    values = []
    for workers in ("1", "2"):
        out = tmp_path / f"w{workers}.json"
        r = CliRunner().invoke(main, ["check", "payoffs/vanilla.py", "--model", f"{MODELS}:ScriptGBM",
                                      "--select", "EuropeanCall/above_forward", "--select", "EuropeanPut/increasing",
                                      "--paths", "8192", "--workers", workers, "--json", str(out),
                                      "--inner-points", "0"])  # the declared checks, counted below
        assert r.exit_code == 0, r.output
        import json

        values.append([(c["case"], c["value"], c["stderr"]) for c in json.loads(out.read_text())["cases"]])
    assert values[0] == values[1] and len(values[0]) == 3  # two checks and the run's audit


# --- declared in a TOML file, without Python ------------------------------------------------------


def test_a_toml_declared_simulator_is_audited():
    r = CliRunner().invoke(main, ["audit", f"{HERE / 'script_gbm.toml'}:vol=0.3", "--only", "martingale",
                                  "--only", "steps", "--paths", "20000"])
    assert r.exit_code == 0, r.output
    assert re.search(r"^TomlGBM\s+steps_limit\s.*PASS$", r.output, re.M)  # against its Black-Scholes claim


@pytest.mark.parametrize("text, message", [
    ('name = "X"\ncommand = ["sim", "{output}"]\ncolour = 1\n', r"unknown key 'colour'; the keys are: name, command"),
    ('name = "X"\ntimeout = = 3\ncommand = ["sim", "{output}"]\n', r"not a valid TOML file: .*line 2"),
    ('name = "X"\ncommand = ["sim", "{output}"]\n[params]\nspot = {low = 0}\n', r"params.spot: no 'default'"),
    ('name = "X"\ncommand = ["sim", "{outptu}"]\n[params]\nspot = 1\nrate = 0\ndividend = 0\n',
     r"model class X: command argument '\{outptu\}' uses the unknown placeholder"),
    ('name = "X"\ncommand = ["sim", "{output}"]\nreference = "heston"\n', r"reference = 'heston'; the one known"),
    ('name = "X"\n', r"no 'command'"),
])
def test_toml_mistakes_name_the_file_and_key(tmp_path, text, message):
    f = tmp_path / "engine.toml"
    f.write_text(text)
    with pytest.raises(InputError, match=rf"{re.escape(str(f))}.*{message}"):
        resolve_model(str(f))
