"""Repricing the calibration instruments by Monte Carlo: the calibrated Heston model prices
every demo quote back within its bid-ask; a mis-specified or badly discretised simulation,
and a model that cannot fit the skew, are caught; outputs have the format of ``check``."""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET

import pytest
from click.testing import CliRunner
from scipy.stats import norm

from limitcase.calibrate import calibrate, reprice
from limitcase.cli import main
from limitcase.report.jsonfile import outcomes_document
from limitcase.report.junit import junit_tree
from limitcase.suite import DEFAULT_SEED

from .conftest import DEMO

ALPHA = 0.01
PATHS = 16384


@pytest.fixture(scope="module")
def demo_reprice(demo_heston):
    return reprice(demo_heston, paths=PATHS, seed=DEFAULT_SEED, alpha=ALPHA)


def test_calibrated_heston_reprices_every_demo_quote_within_bid_ask(demo_reprice, demo_quotes):
    rep = demo_reprice
    assert rep.result.ok, "\n".join(o.message for o in rep.result.outcomes if o.verdict != "pass")
    m = len(rep.rows)
    assert m == len(demo_quotes) == 45
    # Restated from first principles: a run passes only if every quote's p-value is at
    # least alpha/m (Holm never adjusts the smallest p-value by less than m), so every
    # Monte Carlo price lies within its bid-ask widened by z SE with z = Phi^-1(1 - alpha/(4m))
    # (two-sided, and the quote's two tests share its alpha/m by Bonferroni).
    z = norm.isf(ALPHA / (4 * m))
    for r in rep.rows:
        q = r.quote
        assert q.bid - z * r.mc_se <= r.mc <= q.ask + z * r.mc_se, q.label
        assert abs(r.mc - r.formula) <= z * r.mc_se, q.label
    # (at 16384 paths the standard error is about half the half-spread on the median quote;
    # that the same test catches wrong simulations is shown by the tests below)


def test_reprice_outcomes_have_the_format_of_check(demo_reprice):
    res = demo_reprice.result
    assert {o.kind for o in res.outcomes} == {"reprice"}
    assert {o.product for o in res.outcomes} == {"Heston"}
    assert res.outcomes[0].case == "T=2026-04-17 K=2500 put"
    assert res.outcomes[0].legs == ("EuropeanPut(strike=2500, maturity=0.126027)",)
    doc = json.loads(json.dumps(outcomes_document(res, "reprice"), allow_nan=False))
    assert doc["command"] == "reprice" and doc["summary"] == {"pass": 45, "fail": 0, "error": 0, "skip": 0, "total": 45}
    cal = doc["settings"]["calibration"]
    assert cal["model"] == "Heston" and set(cal["parameters"]) == {"v0", "kappa", "theta", "vol_of_vol", "rho"}
    assert cal["feller"]["holds"] is False
    row = doc["settings"]["table"][0]
    for key in ("market", "bid", "ask", "formula", "mc", "mc_stderr", "diff_price", "diff_vol_points", "diff_spreads"):
        assert row[key] is not None, key
    tree = junit_tree(res, "reprice", "limitcase reprice q.csv")
    cases = tree.getroot().find("testsuite").findall("testcase")
    assert len(cases) == 45 and cases[0].get("classname") == "reprice.Heston"


def test_misspecified_correlation_in_the_simulation_is_caught(demo_heston):
    # the simulation uses rho = +0.65 where the calibrated model has -0.65: the skew turns
    # over, and the formula test (MC against the calibrated model's own price) sees it
    rep = reprice(demo_heston, paths=8192, seed=DEFAULT_SEED, alpha=ALPHA, mc_model=lambda m: m.replace(rho=-m.rho))
    assert not rep.result.ok
    by_label = {r.quote.label: r for r in rep.rows}
    for t in ("2026-04-17", "2026-06-19", "2026-09-18", "2027-03-19", "2028-03-17"):
        lowest = min((r for r in rep.rows if r.quote.expiry_text == t), key=lambda r: r.quote.strike)
        assert lowest.verdict == "fail", lowest.quote.label
        assert lowest.p_formula < 1e-6
    assert by_label["T=2028-03-17 K=1700 put"].mc < by_label["T=2028-03-17 K=1700 put"].quote.bid


def test_too_coarse_scheme_is_caught(demo_heston):
    # one full-truncation Euler step per expiry (under a year): the log-price is Gaussian
    # with variance v0 T, no smile at all
    rep = reprice(demo_heston, paths=8192, seed=DEFAULT_SEED, alpha=ALPHA, scheme="euler", steps_per_year=1)
    assert not rep.result.ok
    fails = [r for r in rep.rows if r.verdict == "fail"]
    assert len(fails) > len(rep.rows) / 2
    # the witness is the formula test: the simulation does not reproduce the model it was
    # given (the formula prices fit the market, so the band test sees it more weakly)
    assert all(r.p_formula <= r.p_band for r in fails)


def test_black_scholes_misses_the_skew_but_matches_its_own_formula(demo_quotes):
    cal = calibrate(demo_quotes, "black-scholes")
    rep = reprice(cal, paths=8192, seed=DEFAULT_SEED, alpha=ALPHA)
    fails = [r for r in rep.rows if r.verdict == "fail"]
    assert fails and not rep.result.ok
    m = len(rep.rows)
    # exact GBM paths: Monte Carlo agrees with the closed form everywhere; what fails is the fit
    assert all(r.p_formula >= ALPHA / (2 * m) for r in rep.rows)
    assert all(r.p_band < ALPHA / m for r in fails)
    wings = {r.quote.label for r in fails}
    assert "T=2028-03-17 K=1700 put" in wings  # the deepest put of the skew


def test_select_gives_the_same_number_for_a_quote(demo_quotes):
    cal = calibrate(demo_quotes, "black-scholes")
    full = reprice(cal, paths=4096, seed=7, alpha=ALPHA)
    one = reprice(cal, paths=4096, seed=7, alpha=ALPHA, select=["T=2026-09-18 K=2500 put"])
    assert len(one.rows) == 1
    twin = next(r for r in full.rows if r.quote.label == "T=2026-09-18 K=2500 put")
    # the same paths; the sums differ only in the order numpy adds them (one column or many),
    # so they agree to the rounding of a 4096-term sum, about 4096 eps = 1e-12 relative
    assert one.rows[0].mc == pytest.approx(twin.mc, rel=1e-12)
    assert one.rows[0].mc_se == pytest.approx(twin.mc_se, rel=1e-12)


# ---------------------------------------------------------------------------------------
# the command


def test_command_on_the_demo_with_every_output(tmp_path):
    js, ju, plots = tmp_path / "r.json", tmp_path / "r.xml", tmp_path / "plots"
    r = CliRunner().invoke(main, [
        "reprice", str(DEMO / "fablewood50.csv"), "--paths", "4096", "--starts", "1",
        "--select", "T=2026-04-17", "--select", "T=2028-03-17",
        "--json", str(js), "--junit", str(ju), "--plot", str(plots),
    ])
    assert r.exit_code == 0, r.output
    assert "Heston calibration" in r.output and "Feller" in r.output
    assert "18 quotes: 18 pass, 0 fail, 0 error" in r.output
    doc = json.loads(js.read_text())
    assert doc["command"] == "reprice" and len(doc["cases"]) == 18
    assert ET.parse(ju).getroot().find("testsuite").get("tests") == "18"
    pngs = sorted(p.name for p in plots.iterdir())
    assert pngs == ["smile_01_T2026-04-17.png", "smile_02_T2028-03-17.png"]
    assert all((plots / p).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" for p in pngs)


def test_command_fails_with_exit_1_and_a_reproducible_line(tmp_path):
    args = ["reprice", str(DEMO / "fablewood50.csv"), "--model", "black-scholes", "--paths", "4096"]
    r = CliRunner().invoke(main, args)
    assert r.exit_code == 1, r.output
    line = next(s for s in r.output.splitlines() if s.strip().startswith("reproduce:"))
    assert "--model black-scholes" in line and "--select 'Black-Scholes/T=" in line
    label = line.split("--select '")[1].rstrip("'")
    again = CliRunner().invoke(main, args + ["--select", label])
    assert again.exit_code == 1 and f"FAIL {label}" in again.output
