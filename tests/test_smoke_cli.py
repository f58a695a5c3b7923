"""The command line's contract: exit codes 0 / 1 / 2 on the catalogue, a bug, a bad path."""

from pathlib import Path

from click.testing import CliRunner

from limitcase.cli import main

ROOT = Path(__file__).resolve().parents[1]


def test_catalogue_passes():
    r = CliRunner().invoke(main, ["check", "--paths", "20000"])
    assert r.exit_code == 0, r.output


def test_buggy_example_fails():
    r = CliRunner().invoke(main, ["check", str(ROOT / "examples" / "buggy_asian.py"), "--paths", "20000"])
    assert r.exit_code == 1, r.output
    assert "FAIL" in r.output


def test_missing_path_is_bad_input():
    r = CliRunner().invoke(main, ["check", "no/such/file.py"])
    assert r.exit_code == 2
    assert "no such file" in r.output
