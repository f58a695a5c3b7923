"""Levels hit exactly: a declared tie convention is checked on edge paths with fixings on the
level, and ``>`` written for ``>=`` (or the reverse) fails the check."""

from __future__ import annotations

import numpy as np
import pytest

from limitcase import DeclarationError, Param, Product, Tie
from limitcase.edges import edge_paths
from limitcase.mutate.equivalence import edge_paths as mutation_edge_paths
from limitcase.reduce import checks_for
from limitcase.suite import run_checks
from limitcase.testing import assert_caught
from limitcase_payoffs.barriers import DownAndOutCall, UpAndOutCallContinuous
from limitcase_payoffs.digitals import CashOrNothingCall



def _decide(check):
    """A tie check's decision on its own legs, as the runner makes it."""
    return check.direct(check.legs)

def _tie(product, case):
    return next(c for c in checks_for(product) if c.case == case)


def test_the_mutation_tool_and_the_tie_checks_share_one_edge_path_builder():
    assert mutation_edge_paths is edge_paths


def test_a_strict_digital_passes_its_declared_tie_and_an_inclusive_one_fails():
    # common practice: a cash-or-nothing call pays when S(T) > K; the catalogue says so
    ok, message, n = _decide(_tie(CashOrNothingCall, "tie_at_strike"))
    assert ok is True and n > 0 and "as just below" in message

    class Inclusive(CashOrNothingCall):
        def payoff(self, obs):
            return np.where(obs.s[:, -1] >= self.strike, self.cash, 0.0)

    ok, message, _ = _decide(_tie(Inclusive, "tie_at_strike"))
    assert ok is False and "treated as above" in message
    assert_caught(Inclusive, "tie_at_strike", paths=1000)


class _StrictDownAndOut(DownAndOutCall):
    """Knocked out only below the barrier (S < H), where the catalogue says S <= H."""

    def payoff(self, obs):
        s = np.column_stack([np.full(obs.paths, obs.s0), obs.s])
        alive = np.all(s >= self.barrier, axis=1)
        return np.where(alive, np.maximum(obs.s[:, -1] - self.strike, 0.0), self.rebate)


def test_a_barrier_touched_exactly_must_count_as_hit_and_the_run_fails_outright():
    result = run_checks([_tie(_StrictDownAndOut, "tie_at_barrier")], paths=1000, seed=1)
    (o,) = [o for o in result.outcomes if o.kind != "audit"]
    assert o.verdict == "fail" and o.pathwise_ok is False and o.p_value == 0.0
    assert "barrier=80" in o.message
    assert run_checks([_tie(DownAndOutCall, "tie_at_barrier")], paths=1000, seed=1).ok


def test_continuous_monitoring_has_nothing_to_decide_on_a_tie():
    # a Brownian bridge crosses a level a fixing sits a hair away from, on either side
    product = UpAndOutCallContinuous()
    from limitcase.ties import tie_result

    ok, message, _ = tie_result(product, product.scenario(), Tie("barrier", "above"), "above")
    assert ok is None and "nothing to decide" in message


def test_tie_declarations_are_checked_when_the_class_is_defined():
    with pytest.raises(DeclarationError, match="side='on'"):
        class _Bad(Product):
            strike = Param(100.0, low=0.0)
            relations = (Tie("strike", "on"),)

    with pytest.raises(DeclarationError, match="strik"):
        class _Misspelt(Product):
            strike = Param(100.0, low=0.0)
            relations = (Tie("strik", "above"),)


def test_the_under_checked_examples_strict_comparison_survivor_is_caught_once_its_tie_is_declared():
    from pathlib import Path

    from limitcase.loader import load_products

    example = Path(__file__).resolve().parents[2] / "examples" / "under_checked.py"
    (thin,) = load_products([str(example)])

    declared = type("Declared", (thin,), {"relations": (Tie("barrier", "above"),), "__module__": __name__})

    def payoff(self, obs):  # the surviving mutant: `<` -> `<=`
        alive = np.all(obs.s <= self.barrier, axis=1)
        vanilla = np.maximum(obs.s[:, -1] - self.strike, 0.0)
        return np.where(alive, vanilla, self.rebate)

    mutant = type("DeclaredMutant", (declared,), {"payoff": payoff, "__module__": __name__})
    assert _decide(_tie(declared, "tie_at_barrier"))[0] is True
    assert _decide(_tie(mutant, "tie_at_barrier"))[0] is False
