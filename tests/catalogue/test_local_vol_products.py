"""Products checked under local volatility: every declared check passes on the skewed
surface, every check catches a realistic bug (the barrier family's own broken payoffs),
and the European base case's surface price is what the simulation converges to."""

from __future__ import annotations

import math

import numpy as np
import pytest

from limitcase.reduce import checks_for
from limitcase.testing import assert_all_pass, assert_caught
from limitcase_payoffs.local_vol import LocalVolDownAndOutCall
from limitcase_payoffs.vanilla import EuropeanCall

from test_barriers import (best_fixing, in_out_swapped, misses_last_date, only_at_maturity, rebate_at_expiry_always,
                           touch_strict, wrong_side)

BUGS = {
    "barrier_out_of_reach": wrong_side,
    "touched_today": only_at_maturity,
    "touched_today_rebate_paid_now": rebate_at_expiry_always,
    "in_plus_out_is_vanilla": only_at_maturity,
    "in_plus_out_with_rebates": misses_last_date,
    "worth_more_as_barrier_moves_away": in_out_swapped,
    "at_most_vanilla": best_fixing,
    "closed_form": only_at_maturity,
    "tie_at_barrier": touch_strict,
}


def test_every_declared_check_passes():
    assert_all_pass(LocalVolDownAndOutCall, paths=20_000)


@pytest.mark.parametrize("case, bug", list(BUGS.items()), ids=list(BUGS))
def test_broken_twin_is_caught(case, bug):
    twin = type(f"LocalVolDownAndOutCall_{bug.__name__}", (LocalVolDownAndOutCall,),
                {getattr(bug, "attr", "payoff"): bug})
    assert_caught(twin, case, paths=20_000)


def test_every_declared_check_has_a_broken_twin():
    assert {c.case for c in checks_for(LocalVolDownAndOutCall)} == set(BUGS)


def test_the_european_reference_is_the_surface_price_not_black_scholes():
    model = LocalVolDownAndOutCall().scenario()
    call = EuropeanCall(strike=90.0, maturity=1.0)
    surface_vol = float(model.surface.implied_vol(90.0, 1.0))
    atm_vol = model.surface.atm_vol()
    assert abs(surface_vol - atm_vol) > 0.01  # the skew matters at 90
    assert "implied surface" in call.reference_source(model)
    from limitcase.references import black_scholes
    assert call.reference(model) == pytest.approx(
        black_scholes(100.0, 90.0, 1.0, model.rate, model.dividend, surface_vol, "call"), rel=1e-12)


def test_the_knock_out_reference_is_the_local_vol_equation_from_the_terms():
    """Under the skewed surface the reference solves the local-volatility equation (not a
    Black-Scholes formula at some volatility), over dates rebuilt from the terms: a product
    whose dates() drop the last monitoring date keeps the same reference."""
    product = LocalVolDownAndOutCall()
    model = product.scenario()
    assert "finite differences" in product.reference_source()
    flat = model.replace(surface=model.surface.flattened())
    assert abs(product.reference(model) - product.reference(flat)) > 0.02  # the skew matters (0.030)

    class FewerDates(LocalVolDownAndOutCall):
        def dates(self):
            return super().dates()[:-1]

    assert FewerDates().reference(model) == product.reference(model)
    knocked = product.replace(barrier=101.0)
    assert knocked.reference(model) == pytest.approx(knocked.rebate)
