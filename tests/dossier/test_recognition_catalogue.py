"""The recognition of every catalogue reduction (limitcase.symbolic.recognise) is what it was
when every difference went through ``sympy.simplify``, now that cheap rewritings come first
and simplify is skipped on a difference with many comparisons.

The expected outcomes were recorded by running the earlier code (``sympy.simplify`` of every
difference, then the same probe) on the shipped catalogue, 2026-12-05; a reduction declares
an exact identity, so ``equal`` is the outcome the mathematics asks for wherever both sides
state a formula. The four ``undecided`` ones are the knock-ins touched today: their formula
keeps the spot ``S_0`` as a symbol, so the knock-in's condition on 53 prices stays in the
difference (simplify returned it as it was). The slow test checks that claim against
``sympy.simplify`` itself.
"""

from __future__ import annotations

import pytest
import sympy as sp

from limitcase import symbolic
from limitcase.loader import load_products
from limitcase.reduce import limit_product

RECORDED = {
    "ArithmeticAsianCall/closed_form": "equal",
    "ArithmeticAsianCall/one_fixing": "equal",
    "ArithmeticAsianCall/zero_strike": "n/a",
    "CashOrNothingCall/closed_form": "equal",
    "CashOrNothingCall/ends_at_the_strike": "n/a",
    "CashOrNothingCall/zero_strike": "n/a",
    "DownAndInCall/barrier_out_of_reach": "n/a",
    "DownAndInCall/closed_form": "equal",
    "DownAndInCall/touched_today": "undecided",
    "DownAndInPut/barrier_out_of_reach": "n/a",
    "DownAndInPut/closed_form": "equal",
    "DownAndInPut/touched_today": "undecided",
    "DownAndOutCall/barrier_out_of_reach": "equal",
    "DownAndOutCall/closed_form": "equal",
    "DownAndOutCall/touched_today": "n/a",
    "DownAndOutCall/touched_today_rebate_paid_now": "n/a",
    "DownAndOutPut/barrier_out_of_reach": "equal",
    "DownAndOutPut/closed_form": "equal",
    "DownAndOutPut/touched_today": "n/a",
    "DownAndOutPut/touched_today_rebate_paid_now": "n/a",
    "EuropeanCall/closed_form": "equal",
    "EuropeanCall/zero_strike": "n/a",
    "EuropeanPut/closed_form": "equal",
    "EuropeanPut/zero_strike": "n/a",
    "GeometricAsianCall/closed_form": "equal",
    "GeometricAsianCall/one_fixing": "equal",
    "LocalVolDownAndOutCall/barrier_out_of_reach": "equal",
    "LocalVolDownAndOutCall/touched_today": "n/a",
    "LocalVolDownAndOutCall/touched_today_rebate_paid_now": "n/a",
    "LocalVolDownAndOutCall/closed_form": "equal",
    "UpAndInCall/barrier_out_of_reach": "n/a",
    "UpAndInCall/closed_form": "equal",
    "UpAndInCall/touched_today": "undecided",
    "UpAndInPut/barrier_out_of_reach": "n/a",
    "UpAndInPut/closed_form": "equal",
    "UpAndInPut/touched_today": "undecided",
    "UpAndOutCall/barrier_out_of_reach": "equal",
    "UpAndOutCall/closed_form": "equal",
    "UpAndOutCall/touched_today": "n/a",
    "UpAndOutCall/touched_today_rebate_paid_now": "n/a",
    "UpAndOutPut/barrier_out_of_reach": "equal",
    "UpAndOutPut/closed_form": "equal",
    "UpAndOutPut/touched_today": "n/a",
    "UpAndOutPut/touched_today_rebate_paid_now": "n/a",
}


def _catalogue_reductions():
    out = []
    for cls in load_products(()):
        product = cls()
        if product.formula() is None:
            continue
        out.extend((product, red) for red in cls.reductions)
    return out


def test_every_catalogue_recognition_is_the_recorded_one():
    got = {f"{type(p).__name__}/{r.name}": symbolic.recognise(p, r).status for p, r in _catalogue_reductions()}
    assert got == RECORDED


def test_a_difference_with_many_comparisons_is_not_given_to_simplify_and_says_so():
    (p, r), = [(p, r) for p, r in _catalogue_reductions()
               if type(p).__name__ == "DownAndInPut" and r.name == "touched_today"]
    rec = symbolic.recognise(p, r)
    assert rec.status == "undecided"
    assert rec.message.startswith("sympy.piecewise_fold (sympy.simplify not tried: 53 comparisons, above 8) left ")
    conditions = rec.difference.atoms(sp.core.relational.Relational)
    assert len(conditions) == 53 > symbolic.SIMPLIFY_MOST_CONDITIONS


def test_a_difference_that_cancels_is_recognised_without_simplify(monkeypatch):
    """The cheap routes decide every ``equal`` of the catalogue: with ``sympy.simplify``
    made to raise, the recognitions are unchanged."""
    def boom(*args, **kwargs):
        raise AssertionError("sympy.simplify called")

    monkeypatch.setattr(symbolic.sp, "simplify", boom)
    got = {f"{type(p).__name__}/{r.name}": symbolic.recognise(p, r).status for p, r in _catalogue_reductions()}
    assert got == RECORDED


@pytest.mark.slow
def test_simplify_returns_what_the_cheap_route_keeps_where_it_is_skipped():
    """Where simplify is skipped, running it (about a minute each) gives the same expression."""
    for p, r in _catalogue_reductions():
        at = limit_product(p, r)
        base = r.becomes(at)
        if at.formula() is None or base.formula() is None:
            continue
        diff = (symbolic._timed(at, symbolic.substituted(at)) - symbolic._timed(base, symbolic.substituted(base)))
        reduced, route = symbolic._reduced(diff)
        if "not tried" in route:
            assert sp.simplify(diff) == reduced, f"{type(p).__name__}/{r.name}"
