"""The sizing rule of the long commands, ``mutate`` and ``report``: estimated before anything
is priced, a warning with the estimate above an hour, a refusal (exit 2) above a week unless
``--allow-long-run`` (limitcase.sizing.estimate_mutation / estimate_dossier)."""

from __future__ import annotations

import pytest
from click.testing import CliRunner

from limitcase import ParamError, checks_for
from limitcase.cli import main
from limitcase.document import build_dossier
from limitcase.loader import load_products
from limitcase.mutate import make_mutants, run_mutation
from limitcase.settings import AUDIT_UNITS_PER_PATH, MUTATE_SURVIVOR_SHARE, PATH_DATES_PER_SECOND
from limitcase.sizing import estimate_dossier, estimate_mutation, estimate_run

from .test_catalogue import GOOD


def _good():
    ns: dict = {}
    exec(compile(GOOD, "good.py", "exec"), ns)
    return ns["GoodCall"]


def test_the_mutation_estimate_is_the_documented_rule():
    cls = _good()
    checks = checks_for(cls)  # one check: GoodCall and the European call, one date, one normal a step
    per = 1 * (1 + 2)  # dates x (normals + legs)
    size = estimate_mutation([(cls, checks, 10)], paths=100_000, quick_paths=10_000, equivalence_paths=4096,
                             workers=2)
    # the full-budget original only once a mutant survives: weight min(1, 10 x share)
    originals = 10_000 * per + min(1.0, 10 * MUTATE_SURVIVOR_SHARE) * 100_000 * per
    point = 4096 * 1 * (1 + 1)  # one point where a leg is the product itself: paths and the original, once
    eq = 4096 * 1  # each mutant priced on that point's shared paths
    mutants = 10 * (10_000 * per + eq + MUTATE_SURVIVOR_SHARE * 100_000 * per)
    assert size.work == pytest.approx(originals + point + mutants)
    assert size.seconds == pytest.approx(size.work / PATH_DATES_PER_SECOND / 2)
    assert size.describe().startswith("10 mutants of 1 product (1 checks of the originals; first pass at 10,000 "
                                      "paths, survivors at 100,000) are estimated at")


def test_the_dossier_estimate_is_the_documented_rule():
    cls = _good()
    p = cls()
    checks = checks_for(p)
    size = estimate_dossier(checks, [(p, p.scenario())], paths=16_384, points=7, audit_paths=100_000,
                            audited_models=1, workers=1)
    run = estimate_run(checks, paths=16_384).work
    sweep = 16_384 * 1 * (1 + 8)  # one reduction: 8 legs together on one date
    conv = 2 * 16_384 * 1 * (1 + 1)  # paths, paths/2, ...: about two runs; Black-Scholes has no step
    assert size.work == pytest.approx(run + sweep + conv + 100_000 * AUDIT_UNITS_PER_PATH)
    assert "the dossier of 1 product" in size.describe()


def test_a_mutation_run_above_the_limit_is_refused_before_any_work_unless_allowed(monkeypatch, tmp_path):
    (tmp_path / "good.py").write_text(GOOD)  # a mutant is made from its module's source file
    (cls,) = load_products([str(tmp_path / "good.py")])
    with pytest.raises(ParamError) as err:
        run_mutation([cls], paths=10**15, quick_paths=1000, workers=1)
    text = str(err.value)
    assert "run refused before it started" in text and "--allow-long-run" in text
    assert f"{len(make_mutants(cls)[0])} mutants of 1 product" in text
    import limitcase.sizing as sizing

    monkeypatch.setattr(sizing, "RUN_WARN_SECONDS", 0.0)
    notes: list[str] = []
    report = run_mutation([cls], paths=2000, quick_paths=1000, equivalence_paths=1024, workers=1, warn=notes.append)
    assert len(notes) == 1 and notes[0].startswith("warning: a long run:")
    assert report.results and report.settings["estimated_seconds"] >= 0
    monkeypatch.setattr(sizing, "RUN_REFUSE_SECONDS", 0.0)
    with pytest.raises(ParamError):
        run_mutation([cls], paths=2000, quick_paths=1000, workers=1)


def test_a_dossier_above_the_limit_is_refused_before_any_work_unless_allowed(monkeypatch):
    cls = _good()
    with pytest.raises(ParamError) as err:
        build_dossier([cls], paths=10**13, seed=1, alpha=0.01, audits=False)
    assert "run refused before it started" in str(err.value) and "the dossier of 1 product" in str(err.value)
    import limitcase.sizing as sizing

    monkeypatch.setattr(sizing, "RUN_REFUSE_SECONDS", 0.0)
    monkeypatch.setattr(sizing, "RUN_WARN_SECONDS", 0.0)
    with pytest.raises(ParamError):
        build_dossier([cls], paths=1024, seed=1, alpha=0.01, audits=False)
    notes: list[str] = []
    d = build_dossier([cls], paths=1024, seed=1, alpha=0.01, audits=False, points=2, allow_long_run=True,
                      warn=notes.append)
    assert d.ok and len(notes) == 1 and "the dossier of 1 product" in notes[0]


@pytest.mark.parametrize("command", [["mutate", "--quick-paths", "1000", "--paths", "1000",
                                      "--equivalence-paths", "1024"],
                                     ["report", "--paths", "1024", "--points", "2", "--no-audits"]])
def test_the_long_commands_warn_above_an_hour_and_refuse_above_a_week(tmp_path, monkeypatch, command):
    import limitcase.sizing as sizing

    (tmp_path / "good.py").write_text(GOOD)
    args = [command[0], str(tmp_path / "good.py"), *command[1:], "--workers", "1"]
    if command[0] == "report":
        args += ["-o", str(tmp_path / "out")]
    monkeypatch.setattr(sizing, "RUN_WARN_SECONDS", 0.0)
    r = CliRunner().invoke(main, args)
    assert r.exit_code == 0, r.output
    assert "warning: a long run: " in r.stderr and "estimated at" in r.stderr
    monkeypatch.setattr(sizing, "RUN_REFUSE_SECONDS", 0.0)
    r = CliRunner().invoke(main, args)
    assert r.exit_code == 2 and "run refused before it started" in r.output and "--allow-long-run" in r.output
    assert "Traceback" not in r.output
    r = CliRunner().invoke(main, [*args, "--allow-long-run"])
    assert r.exit_code == 0, r.output
