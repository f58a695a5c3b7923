"""``reprice --model local-vol``: the SVI surface fitted to quotes, checked free of static
arbitrage, and its own vanillas repriced by Monte Carlo under Dupire's local volatility.

The quotes are made here from a known arbitrage-free SVI surface (Black-Scholes prices at
the surface's implied volatility, scipy-free closed form from references), so the fit must
give the surface back, and the simulation must reprice it."""

from __future__ import annotations

import math

import numpy as np
import pytest
from click.testing import CliRunner

from limitcase.calibrate import calibrate, reprice
from limitcase.cli import main
from limitcase.models.localvol import example_surface
from limitcase.quotes import load_quotes, resolve_market
from limitcase.references import black_scholes

SPOT, RATE, DIV = 100.0, 0.03, 0.01


@pytest.fixture(scope="module")
def surface_quotes(tmp_path_factory):
    surf = example_surface(SPOT, RATE, DIV)
    folder = tmp_path_factory.mktemp("lv")
    lines = ["expiry,strike,type,price,bid,ask"]
    for t in (0.25, 0.5, 1.0):
        for k in (80.0, 90.0, 95.0, 100.0, 105.0, 110.0, 120.0):
            kind = "put" if k < 100 else "call"
            vol = float(surf.implied_vol(k, t))
            p = float(black_scholes(SPOT, k, t, RATE, DIV, vol, kind))
            vega = SPOT * math.exp(-DIV * t) * math.sqrt(t) * math.exp(-0.5 * ((math.log(SPOT / k) + (RATE - DIV + 0.5 * vol**2) * t) / (vol * math.sqrt(t)))**2) / math.sqrt(2 * math.pi)
            half = max(0.005 * vega, 0.01)  # half a vol point of spread
            lines.append(f"{t},{k},{kind},{p:.10f},{max(p - half, 0):.10f},{p + half:.10f}")
    path = folder / "quotes.csv"
    path.write_text("\n".join(lines) + "\n")
    (folder / "quotes.market").write_text(f"spot = {SPOT}\nrate = {RATE}\ndividend = {DIV}\n")
    market = resolve_market(market_file=folder / "quotes.market")
    return path, load_quotes(path, market)


def test_the_fit_gives_the_surface_back(surface_quotes):
    _, qs = surface_quotes
    cal = calibrate(qs, "local-vol")
    assert cal.name == "LocalVol" and cal.surface is not None
    assert cal.rmse_vol < 1e-3  # vol points: SVI reproduces SVI
    np.testing.assert_allclose(cal.formula_prices, [q.price for q in qs.quotes], rtol=1e-6, atol=1e-7)


def test_monte_carlo_reprices_the_surface(surface_quotes):
    _, qs = surface_quotes
    rep = reprice(calibrate(qs, "local-vol"), paths=40_000, seed=7, alpha=0.01, steps_per_year=256)
    assert rep.result.ok, [(o.case, o.message) for o in rep.result.outcomes if o.verdict != "pass"]
    assert rep.scheme == "log-euler"


def test_a_simulation_that_forgets_the_dividend_is_caught(surface_quotes):
    _, qs = surface_quotes
    rep = reprice(calibrate(qs, "local-vol"), paths=40_000, seed=7, alpha=0.01, steps_per_year=256,
                  mc_model=lambda m: m.replace(dividend=m.dividend - 0.03))
    assert not rep.result.ok


def test_command_line_reprices_with_local_volatility(surface_quotes):
    path, _ = surface_quotes
    r = CliRunner().invoke(main, ["reprice", str(path), "--model", "local-vol", "--paths", "20000"])
    assert r.exit_code == 0, r.output
    assert "LocalVol calibration" in r.output and "LOG-EULER scheme, 256 steps a year" in r.output


def test_a_surface_with_calendar_arbitrage_is_refused(tmp_path):
    """Total variance falling between expiries at the money (implied vol 30% at 3 months,
    10% at 6 months) is calendar arbitrage (Gatheral and Jacquier 2014, Lemma 2.1)."""
    lines = ["expiry,strike,type,iv"]
    for t, vol in ((0.25, 0.30), (0.5, 0.10)):
        for k in (90.0, 95.0, 100.0, 105.0, 110.0):
            lines.append(f"{t},{k},call,{vol}")
    path = tmp_path / "q.csv"
    path.write_text("\n".join(lines) + "\n")
    r = CliRunner().invoke(main, ["reprice", str(path), "--model", "local-vol", "--spot", "100", "--rate", "0.03",
                                  "--dividend", "0.01", "--paths", "8192"])
    assert r.exit_code == 2, r.output
    assert "calendar arbitrage between expiries 0.25 and 0.5" in r.output
