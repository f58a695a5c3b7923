"""An original is checked again at the full budget only when one of its mutants survives the
first pass (the survivors' baseline); the others are judged, for false alarms as well, at
the first pass's budget: the whole catalogue at the full budget is what ``limitcase check``
runs, and it was the largest single cost of a mutation run."""

from __future__ import annotations

import numpy as np

from limitcase import Param, Product, Reduction
from limitcase.mutate import run_mutation
from limitcase.report.mutation import render_summary
from limitcase_payoffs.vanilla import ForwardContract, ZeroCouponBond

from .sample_products import FlagCall


def test_only_products_with_a_first_pass_survivor_run_their_original_at_the_full_budget():
    report = run_mutation([FlagCall, ForwardContract], paths=4000, quick_paths=2000, equivalence_paths=4096,
                          workers=1)
    survivors = {r.product for r in report.results if r.paths == 4000}
    assert survivors == {"FlagCall"}  # the sign mutant invisible at strike 0 (see test_mutants)
    assert report.settings["originals_at_full_budget"] == ["FlagCall"]
    # the largest path count of a product's cases is its budget (interior points run on
    # fewer; randomised quasi-Monte Carlo rounds up to whole scrambles)
    assert 4000 <= max(o["paths"] for o in report.originals["FlagCall"]) < 4100
    assert 2000 <= max(o["paths"] for o in report.originals["ForwardContract"]) < 2100
    assert report.false_alarms == []


class DoubledDigital(Product):
    """A digital whose declared zero-strike limit is wrong by a factor two: its original
    fails the exact identity, a false alarm the mutation run must report, at the budget
    the original ran at."""

    strike = Param(100.0, low=0.0, doc="level")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    reductions = (
        Reduction("zero_strike", {"strike": 0.0}, becomes=lambda p: ZeroCouponBond(cash=2.0, maturity=p.maturity)),
    )

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs):
        return np.where(obs.s[:, -1] > self.strike, 1.0, 0.0)


def test_a_false_alarm_names_the_budget_it_was_found_at():
    report = run_mutation([DoubledDigital], paths=4000, quick_paths=2000, equivalence_paths=4096, workers=1)
    alarms = [a for a in report.false_alarms if a["case"].startswith("zero_strike")]
    assert alarms and all(a["product"] == "DoubledDigital" for a in alarms)
    budget = 4000 if "DoubledDigital" in report.settings["originals_at_full_budget"] else 2000
    assert {a["paths"] for a in alarms} == {budget}
    assert f"DoubledDigital/{alarms[0]['case']} ({budget:,} paths)" in render_summary(report)
