"""Shared fixtures: the invented demo quote set, its generator, one Heston fit of it."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pytest

from limitcase.calibrate import calibrate
from limitcase.quotes import load_quotes, resolve_market

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "examples" / "quotes"


@pytest.fixture(scope="session")
def make_quotes():
    spec = importlib.util.spec_from_file_location("make_quotes_demo", DEMO / "make_quotes.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="session")
def demo_quotes():
    market = resolve_market(market_file=DEMO / "fablewood50.market")
    return load_quotes(DEMO / "fablewood50.csv", market)


@pytest.fixture(scope="session")
def demo_heston(demo_quotes):
    return calibrate(demo_quotes, "heston", weighting="vega")
