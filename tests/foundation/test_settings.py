"""One place for every default: the library, the command line, the pytest plugin and
limitcase.testing agree; run arguments are validated once; one reproduce-string builder."""

from __future__ import annotations

import inspect

import click
import pytest

from limitcase import settings
from limitcase.cli import check as check_command
from limitcase.errors import ParamError
from limitcase.suite import run_check, run_checks
from limitcase.testing import run_product


def _cli_default(name: str):
    return next(p.default for p in check_command.params if p.name == name)


def test_library_and_command_line_defaults_agree():
    lib = inspect.signature(run_checks).parameters
    assert lib["method"].default == settings.DEFAULT_METHOD == _cli_default("method") == "auto"
    assert inspect.signature(run_check).parameters["method"].default == settings.DEFAULT_METHOD
    for name in ("paths", "seed", "alpha", "max_paths"):
        assert lib[name].default == getattr(settings, f"DEFAULT_{name.upper()}") == _cli_default(name), name


def test_testing_helpers_run_what_the_command_line_runs():
    own = inspect.signature(run_product).parameters
    for name in ("paths", "seed", "alpha", "method"):
        assert own[name].default == _cli_default(name), name


def test_help_texts_show_the_settings():
    ctx = click.Context(check_command)
    text = check_command.get_help(ctx)
    assert f"default {settings.DEFAULT_REGRESSION_PATHS}" in text
    assert str(settings.DEFAULT_MAX_PATHS) in text and str(settings.DEFAULT_SEED) in text


def test_run_checks_samples_auto_by_default():
    from limitcase.loader import load_products
    from limitcase.reduce import checks_for

    call = next(p for p in load_products([]) if p.__name__ == "EuropeanCall")
    check = next(c for c in checks_for(call) if c.kind == "relation")
    outcome = run_checks([check], paths=4096, seed=1).outcomes[0]
    assert outcome.method != "plain" and outcome.method == run_checks([check], paths=4096, seed=1,
                                                                      method="auto").outcomes[0].method


@pytest.mark.parametrize(
    "kwargs, pattern",
    [
        ({"paths": 1}, r"paths=1 must be an integer >= 2"),
        ({"paths": 500, "min_paths": 1000}, r"paths=500 must be an integer >= 1000"),
        ({"paths": 2.5}, r"paths=2.5 must be an integer"),
        ({"seed": -1}, r"seed=-1 must be None, a non-negative integer or a SeedSequence"),
        ({"alpha": 1.0}, r"alpha=1.0 must lie in \(0, 1\)"),
        ({"alpha": "0.01"}, r"alpha='0.01' must lie in \(0, 1\)"),
        ({"method": "sobel"}, r"method='sobel' is not a sampling method; use one of auto, plain"),
        ({"max_paths": 1}, r"max_paths=1 must be an integer >= 2"),
        ({"workers": 0}, r"workers=0 must be an integer >= 1"),
        ({"regression_paths": 0}, r"regression_paths=0 must be an integer >= 2"),
    ],
)
def test_validate_run_names_the_argument_and_what_is_allowed(kwargs, pattern):
    with pytest.raises(ParamError, match=pattern):
        settings.validate_run(**kwargs)


def test_validate_run_accepts_the_defaults():
    settings.validate_run()


def test_run_checks_validates_before_any_work():
    with pytest.raises(ParamError, match=r"regression_paths=1 must be"):
        run_checks([], regression_paths=1)


@pytest.mark.parametrize(
    "args, kwargs, expected",
    [
        (("check", ["payoffs"]), dict(seed=7, paths=1000),
         "limitcase check payoffs --seed 7 --paths 1000"),
        (("check", []), dict(seed=None, paths=None, method="plain", precision="0.5%", max_paths=10_000),
         "limitcase check --method plain --precision 0.5% --max-paths 10000"),
        (("check", ["my dir/p.py"]), dict(seed=1, paths=100, select="Call/parity", alpha=0.05, method="auto"),
         "limitcase check 'my dir/p.py' --seed 1 --paths 100 --alpha 0.05 --select 'Call/parity'"),
        (("audit", ["Heston"]), dict(seed=1, paths=100, max_paths=5, alpha=0.01),
         "limitcase audit Heston --seed 1 --paths 100"),
        (("reprice", ["quotes.csv"]), dict(seed=3, paths=200, model="heston", select="it's"),
         "limitcase reprice quotes.csv --model heston --seed 3 --paths 200 --select 'it'\\''s'"),
    ],
)
def test_reproduce_command(args, kwargs, expected):
    assert settings.reproduce_command(*args, **kwargs) == expected
