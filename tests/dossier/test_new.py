"""`limitcase new`: a product skeleton that reports errors until it is completed."""

from __future__ import annotations

from pathlib import Path

from click.testing import CliRunner

from limitcase.cli import main


def _new(tmp_path: Path, *args: str):
    return CliRunner().invoke(main, ["new", *args, "-o", str(tmp_path)])


def test_new_then_check_reports_the_unfinished_reduction(tmp_path):
    r = _new(tmp_path, "CappedAsianCall")
    assert r.exit_code == 0, r.output
    path = tmp_path / "CappedAsianCall.py"
    assert path.is_file() and "class CappedAsianCall(Product):" in path.read_text()
    r = CliRunner().invoke(main, ["check", str(path), "--paths", "1024"])
    assert r.exit_code == 1, r.output
    assert "ERROR CappedAsianCall/unfinished_limit" in r.output
    assert "complete this reduction" in r.output
    assert "PASS" not in r.output


def test_completed_reduction_with_unwritten_payoff_is_still_an_error(tmp_path):
    _new(tmp_path, "HalfWay")
    path = tmp_path / "HalfWay.py"
    text = path.read_text()
    text = text.replace("# from limitcase_payoffs.vanilla import", "from limitcase_payoffs.vanilla import")
    start = text.index("    # TODO 2")
    end = text.index("class HalfWay")
    text = text[:start] + "    return EuropeanCall(strike=p.strike, maturity=p.maturity)\n\n\n" + text[end:]
    path.write_text(text)
    r = CliRunner().invoke(main, ["check", str(path), "--paths", "1024"])
    assert r.exit_code == 1, r.output
    assert "ERROR HalfWay/unfinished_limit" in r.output and "payoff is not written yet" in r.output


def test_completed_skeleton_passes(tmp_path):
    """Filled in as its comments say (an Asian call averaging the fixings), the skeleton
    checks: its one-fixing reduction holds path by path against the Black-Scholes call."""
    _new(tmp_path, "Filled")
    path = tmp_path / "Filled.py"
    text = path.read_text()
    text = text.replace("# from limitcase_payoffs.vanilla import", "from limitcase_payoffs.vanilla import")
    start = text.index("    # TODO 2")
    end = text.index("class Filled")
    text = text[:start] + "    return EuropeanCall(strike=p.strike, maturity=p.maturity)\n\n\n" + text[end:]
    start = text.index("        # TODO 1")
    text = text[:start] + "        return np.maximum(obs.s.mean(axis=1) - self.strike, 0.0)\n"
    path.write_text(text)
    r = CliRunner().invoke(main, ["check", str(path), "--paths", "4096"])
    assert r.exit_code == 0, r.output
    assert "Filled" in r.output and "unfinished_limit" in r.output and "PASS" in r.output


def test_existing_file_is_kept_unless_forced(tmp_path):
    assert _new(tmp_path, "Twice").exit_code == 0
    (tmp_path / "Twice.py").write_text("# mine\n")
    r = _new(tmp_path, "Twice")
    assert r.exit_code == 2 and "exists" in r.output and "--force" in r.output
    assert (tmp_path / "Twice.py").read_text() == "# mine\n"
    assert _new(tmp_path, "Twice", "--force").exit_code == 0
    assert "class Twice" in (tmp_path / "Twice.py").read_text()


def test_bad_names_exit_two(tmp_path):
    for name, words in (("1st", "not a Python identifier"), ("class", "not a Python identifier"),
                        ("_Hidden", "underscore"), ("has-dash", "not a Python identifier")):
        r = _new(tmp_path, name)
        assert r.exit_code == 2, (name, r.output)
        assert words in r.output and repr(name) in r.output
    assert not list(tmp_path.iterdir())
