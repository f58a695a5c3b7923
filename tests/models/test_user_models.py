"""Models written in a user's own file, audited through the command line at default
settings: the correct ones pass, each broken twin is caught."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from limitcase.cli import main
from limitcase.errors import DeclarationError, InputError, ParamError
from limitcase.models import BlackScholes, Degeneration, Model, MultiBlackScholes
from limitcase.models.spec import parse_model_spec, resolve_model
from limitcase.params import Param

HERE = Path(__file__).parent / "user_models"
CORRECT = HERE / "correct_models.py"
BROKEN = HERE / "broken_models.py"


def _audit(*args):
    return CliRunner().invoke(main, ["audit", *map(str, args)])


def test_the_correct_user_models_pass_every_audit():
    r = _audit(CORRECT)
    assert r.exit_code == 0, r.output
    for name in ("MyGBM", "MyJumps", "MyPair", "MyEulerHeston"):
        assert re.search(rf"^{name}\s+martingale\s.*PASS$", r.output, re.M)
    assert "0 fail, 0 error" in r.output


@pytest.fixture(scope="module")
def broken_run():
    return _audit(BROKEN)


@pytest.mark.parametrize("model, caught_by", [
    ("DriftWithoutDividend", ["martingale", "steps_limit"]),
    ("VarianceByStep", ["martingale", "steps_flat", "steps_limit"]),
    ("NoCompensator", ["martingale", "steps_limit"]),
    ("TransposedFactor", ["martingale", "steps_limit", "degenerations:asset1_alone"]),
    ("FlooredOnce", ["martingale"]),
])
def test_each_broken_twin_is_caught_by_audit_at_default_settings(broken_run, model, caught_by):
    assert broken_run.exit_code == 1, broken_run.output
    for case in caught_by:
        assert f"FAIL {model}/{case}:" in broken_run.output
    assert "Traceback" not in broken_run.output


# --- specs ---------------------------------------------------------------------------------


def test_spec_syntax():
    s = parse_model_spec("heston:kappa=2,theta=0.04,scheme=euler")
    assert (s.target, s.class_name, s.overrides) == ("heston", None, {"kappa": 2, "theta": 0.04, "scheme": "euler"})
    s = parse_model_spec("dir/m.py:Cls:spots=[100, 90],vol=inf")
    assert (s.target, s.class_name) == ("dir/m.py", "Cls") and s.overrides == {"spots": [100, 90], "vol": float("inf")}
    s = parse_model_spec("m.py:vol=0.3")
    assert (s.target, s.class_name, s.overrides) == ("m.py", None, {"vol": 0.3})


def test_shipped_names_take_overrides():
    m = resolve_model("Heston:kappa=2,scheme=euler")
    assert m.kappa == 2.0 and m.scheme == "euler"
    m = resolve_model("multiblackscholes:spots=[100,90],correlation=0.3")
    assert m.spots.tolist() == [100.0, 90.0]


@pytest.mark.parametrize("spec, message", [
    ("bates", r"unknown model 'bates'; the models are: BlackScholes, MultiBlackScholes, Heston, Merton, LocalVol"),
    ("heston:kapa=2", r"Heston has no parameter 'kapa'; its parameters are: spot"),
    ("heston:kappa", r"'kappa' has no value: write heston:kappa=VALUE"),
    ("heston:kappa=2,3", r"'3' is not NAME=VALUE"),
    ("heston:kappa=-1", r"heston.py:\d+: class Heston: kappa=-1 is outside \(0, 50\]"),
    (f"{CORRECT}:Nope", r"correct_models.py: no Model class 'Nope' defined there; its Model classes: MyGBM, MyJumps"),
    (f"{CORRECT}:vol=0.3", r"defines 4 models \(MyGBM, MyJumps, MyPair, MyEulerHeston\); pick one"),
    (f"{CORRECT}:MyGBM:vol=9", r"correct_models.py:\d+: class MyGBM: vol=9 is outside \[0, 5\]"),
])
def test_bad_specs_name_file_class_parameter_and_fix(spec, message):
    with pytest.raises(InputError, match=message):
        resolve_model(spec)


def test_bad_spec_on_the_command_line_is_bad_input():
    r = _audit(f"{CORRECT}:MyGBM:vol=9")
    assert r.exit_code == 2 and "vol=9 is outside [0, 5]" in r.output and "Traceback" not in r.output


# --- replace keeps the user's class; declarations checked where they are written ----------


def test_replace_and_degenerations_keep_the_users_class():
    pair = resolve_model(f"{CORRECT}:MyPair")
    moved = pair.replace(correlation=0.0)
    assert type(moved) is type(pair) and moved.correlation[0, 1] == 0.0 and moved != pair
    with pytest.raises(ParamError, match="MyPair has no parameter 'corr'"):
        pair.replace(corr=0.1)
    heston = resolve_model(f"{CORRECT}:MyEulerHeston")
    assert type(heston.replace(vol_of_vol=0.0)) is type(heston)
    assert type(MultiBlackScholes().replace(rate=0.01)) is MultiBlackScholes


def _declare(**body):
    return type("Mine", (Model,), {"__module__": __name__, **body})


_OK = dict(rate=Param(0.05), initial=lambda self: None, dividend_yields=lambda self: None,
           _simulate=lambda self, t, z, g: None)


@pytest.mark.parametrize("change, message", [
    ({"rate": None}, r"no 'rate' parameter; declare rate = Param\(0.05"),
    ({"_simulate": None}, r"_simulate\(\) is not defined; define _simulate\(self, times, z, rng\)"),
    ({"normals_per_step": 2}, r"normals_per_step = 2 is not a method; write def normals_per_step\(self\) -> int: return 2"),
    ({"n_assets": 0}, r"n_assets = 0; n_assets must be a whole number >= 1"),
    ({"degenerations": (Degeneration("x", {"vl": 0.0}, becomes=lambda m: m),)},
     r"degeneration 'x' changes 'vl', which is not a parameter; use one of its parameters: rate"),
])
def test_declaration_errors_are_raised_at_class_definition(change, message):
    body = {k: v for k, v in {**_OK, **change}.items() if v is not None}
    with pytest.raises(DeclarationError, match=r"test_user_models.py.*model class Mine: " + message):
        _declare(**body)


def test_normals_per_step_must_return_a_count():
    cls = _declare(**_OK, normals_per_step=lambda self: 0.5)
    with pytest.raises(InputError, match=r"normals_per_step\(\) returned 0.5; return a whole number >= 1"):
        _resolve_class(cls)


def _resolve_class(cls):
    from limitcase.models.spec import _instantiate

    return _instantiate(cls, {}, "Mine")


def test_a_subclass_of_a_shipped_model_needs_nothing_more():
    cls = type("Quieter", (BlackScholes,), {"__module__": __name__, "vol": Param(0.1, low=0.0, high=5.0)})
    assert cls().vol == 0.1


# --- check --model ----------------------------------------------------------------------------


def test_check_under_a_user_model_runs_what_fits_and_skips_the_rest(tmp_path):
    out = tmp_path / "run.json"
    r = CliRunner().invoke(main, ["check", "payoffs/vanilla.py", "payoffs/multi_asset.py", "--model",
                                  f"{CORRECT}:MyPair", "--select", "ExchangeOption", "--paths", "8192",
                                  "--workers", "1", "--json", str(out)])
    assert r.exit_code == 0, r.output
    assert "skipped EuropeanCall: reads 1 asset; the model MyPair simulates 2" in r.output
    assert "skipped BasketCall: reads 3 assets; the model MyPair simulates 2" in r.output
    assert re.search(r"(\d+) checks: \1 pass, 0 fail, 0 error", r.output)  # 4 checks and the models' audits
    import json

    settings = json.loads(out.read_text())["settings"]
    assert settings["model"].startswith("MyPair(") and {"product": "BasketPut", "reason":
                                                         "reads 3 assets; the model MyPair simulates 2"} in settings["skipped"]


def test_model_changes_of_a_reduction_keep_the_users_class():
    from limitcase.plan import plan_checks
    from limitcase_payoffs.multi_asset import ExchangeOption

    pair = resolve_model(f"{CORRECT}:MyPair:correlation=0.2")
    checks, skipped = plan_checks([ExchangeOption], pair)
    riskless = next(c for c in checks if c.case == "second_asset_riskless")
    assert not skipped and riskless.error is None
    assert type(riskless.model) is type(pair) and riskless.model.vols[1] == 0.0
    assert riskless.model.correlation[0, 1] == 0.2


def test_a_declaration_error_in_a_model_file_is_bad_input_naming_file_line_class_and_fix(tmp_path):
    f = tmp_path / "sloppy.py"
    f.write_text("import numpy as np\nfrom limitcase.models import Model\nfrom limitcase.params import Param\n\n\n"
                 "class Sloppy(Model):\n    spot = Param(100.0, low=0.0, low_open=True)\n"
                 "    def initial(self):\n        return np.array([self.spot])\n"
                 "    def dividend_yields(self):\n        return np.zeros(1)\n"
                 "    def _simulate(self, times, z, rng):\n        raise NotImplementedError\n")
    r = _audit(f)
    assert r.exit_code == 2
    assert f"{f}:6: model class Sloppy: no 'rate' parameter; declare rate = Param(0.05" in r.output
    assert "Traceback" not in r.output


def test_audit_of_a_folder_reports_a_file_that_does_not_import_and_audits_the_rest(tmp_path):
    (tmp_path / "calm.py").write_text("from limitcase.models import BlackScholes\n\n\nclass Calm(BlackScholes):\n    pass\n")
    (tmp_path / "quits.py").write_text("import sys\nsys.exit(0)\n")
    r = _audit(tmp_path, "--only", "martingale", "--paths", "20000")
    assert r.exit_code == 1, r.output
    assert re.search(r"^Calm\s+martingale\s.*PASS$", r.output, re.M)
    assert "quits.py:2: the file does not import: it calls sys.exit(0)" in r.output


def test_a_default_outside_its_range_is_refused_at_class_definition():
    with pytest.raises(DeclarationError, match=r"Mine: the default of parameter 'vol' is invalid: vol=7.0 is outside \[0, 5\]"):
        _declare(**_OK, vol=Param(7.0, low=0.0, high=5.0))
