"""Mutant classes and the equivalence detector.

A mutant class keeps the original's name, parameters and declarations (so the same checks
apply); a mutated module helper is seen by the product that calls it and not by the
original; ``super()`` in a mutated method keeps its meaning. The equivalence detector
declares equivalent a mutant in a branch the product never takes (dead code), calls real a
mutant that changes the price, and calls real, but "edge only", a ``>`` made ``>=``, which
differs only on a path ending exactly at the strike.
"""

from __future__ import annotations

import numpy as np

from limitcase import BlackScholes
from limitcase.engine import case_key, evaluate
from limitcase.mutate import (
    check_points,
    edge_paths,
    equivalence,
    make_mutants,
    payoff_scope,
    probe_difference,
)
from limitcase.product import Observed
from limitcase.reduce import checks_for

from .sample_products import CappedFlagCall, FlagCall, HelperCall, LevelDigital


def _observed(s_end: list[float], s0: float = 100.0) -> Observed:
    s = np.array(s_end, dtype=float)[:, None]
    return Observed(np.array([1.0]), s, s0, 0.05, lambda: np.full_like(s, 0.04))


def _one(cls, operator: str, text: str):
    ms = [m for m in make_mutants(cls)[0] if m.mutation.operator == operator and text in m.mutation.source]
    assert len(ms) == 1, [m.mutation.source for m in make_mutants(cls)[0]]
    return ms[0]


def test_mutant_keeps_name_params_and_checks():
    m = _one(FlagCall, "sign", "s + self.strike")
    assert m.cls.__name__ == "FlagCall" and m.cls.__qualname__ == FlagCall.__qualname__
    assert issubclass(m.cls, FlagCall) and m.cls.mutant_of is FlagCall
    assert m.cls.param_specs() == FlagCall.param_specs()
    assert m.cls.reductions is FlagCall.reductions
    ours, theirs = checks_for(m.cls), checks_for(FlagCall)
    assert [(c.product, c.case, c.target) for c in ours] == [(c.product, c.case, c.target) for c in theirs]
    obs = _observed([90.0, 110.0])
    assert np.allclose(m.cls().payoff(obs), [190.0, 210.0])  # max(S + K, 0)
    assert np.allclose(FlagCall().payoff(obs), [0.0, 10.0])  # the original is untouched
    assert m.location.endswith("sample_products.py:30")


def test_a_mutated_module_helper_is_seen_by_the_mutant_only():
    assert [e.qualname for e in payoff_scope(HelperCall)] == ["HelperCall.payoff", "HelperCall.dates", "_intrinsic"]
    m = _one(HelperCall, "max_min", "np.minimum(s - k")
    obs = _observed([90.0, 110.0])
    assert np.allclose(m.cls().payoff(obs), [-10.0, 0.0])
    assert np.allclose(HelperCall().payoff(obs), [0.0, 10.0])


def test_super_keeps_its_meaning_in_a_mutated_method():
    m = _one(CappedFlagCall, "max_min", "np.maximum(super().payoff(obs)")
    obs = _observed([90.0, 110.0, 150.0])
    assert np.allclose(m.cls().payoff(obs), [20.0, 20.0, 50.0])  # max(call, cap)


def test_edge_paths_sit_on_the_levels():
    t = np.array([0.25, 0.5, 0.75, 1.0])
    rows = edge_paths(t, 100.0, [100.0, 130.0])
    assert rows.shape[1] == 4
    assert any(np.all(r == 130.0) for r in rows)  # flat at the level
    assert any(r[-1] == 130.0 and r[0] != 130.0 for r in rows)  # ends exactly on it
    assert any(r[2] == 130.0 and r[-1] == 100.0 for r in rows)  # touches it once


def test_dead_branch_mutant_is_equivalent():
    m = _one(FlagCall, "call_put", "np.maximum(s - self.strike, 0.0) if self.call else np.maximum(s - self.strike")
    eq = equivalence(m.cls, FlagCall, paths=4096)
    assert eq.equivalent and not eq.edge_only
    # it was compared at the defaults and at the zero-strike limit, on edge and random paths
    labels = [p.point for p in eq.points]
    assert labels == ["FlagCall", "FlagCall(strike=0)"]
    assert all(p.edge_paths > 0 and p.random_paths == 4096 and p.random_violations == 0 for p in eq.points)
    # dead code stays dead off the check points too
    off = probe_difference(m.cls, FlagCall, paths=4096)
    assert off is not None and not off.differs


def test_price_changing_mutant_is_real():
    m = _one(FlagCall, "sign", "s + self.strike")
    eq = equivalence(m.cls, FlagCall, paths=4096)
    assert not eq.equivalent and not eq.edge_only
    here = eq.points[0]
    assert here.random_violations and here.random_violations > 4000
    # the mean change agrees with a direct Monte Carlo of the two products on the same paths
    joint = evaluate([m.cls(), FlagCall()], BlackScholes(), paths=4096, seed=20261201,
                     key=case_key("FlagCall", "mutation-equivalence", "0"))
    assert abs(joint.estimate((1.0, -1.0)).value - here.difference) < 1e-9


def test_strict_against_non_strict_is_real_but_edge_only():
    m = _one(LevelDigital, "compare_strict", ">=")
    eq = equivalence(m.cls, LevelDigital, paths=4096)
    assert not eq.equivalent and eq.edge_only
    at_default = eq.points[0]
    assert at_default.edge_differences > 0 and at_default.random_violations == 0


def test_check_points_are_the_legs_that_are_the_product():
    pts = check_points(FlagCall)
    assert [p.label for p in pts] == ["FlagCall", "FlagCall(strike=0)"]
    assert all(type(p.product) is FlagCall for p in pts)


def test_run_in_one_process_scores_a_thin_product():
    """FlagCall declares only its zero-strike limit. At strike 0, ``s - K`` and ``s + K`` pay
    alike, so that sign mutant survives (it differs at the defaults, which no check prices
    against a trusted value); mutants of the put branch are equivalent (dead code)."""
    from limitcase.mutate import product_scores, run_mutation

    report = run_mutation([FlagCall], paths=4000, quick_paths=2000, equivalence_paths=4096, workers=1)
    assert report.false_alarms == []
    sign = next(m for m in report.results if m.operator == "sign" and "s + self.strike" in m.diff)
    assert sign.status == "survived" and sign.paths == 4000 and not sign.edge_only
    assert "FlagCall(strike=0)" in sign.suggestion and "strike" in sign.suggestion
    def added(m) -> str:
        return next(x[1:] for x in m.diff.splitlines() if x.startswith("+") and not x.startswith("+++"))

    call_branch = "        return np.maximum(s - self.strike, 0.0) if self.call else "
    dead = [m for m in report.results
            if added(m).startswith(call_branch) and "np.maximum(self.strike - s, 0.0)" not in added(m)]
    assert len(dead) >= 3 and all(m.status == "equivalent" for m in dead)
    caught = [m for m in report.results if m.detected]
    assert caught  # e.g. s - K made K - s pays the put at strike 0: never the forward
    score = product_scores(report)["FlagCall"]
    c = report.counts()
    assert score.score == (c["caught"] + c["error"]) / (c["caught"] + c["error"] + c["survived"])
    assert len({m.id for m in report.results}) == len(report.results)
