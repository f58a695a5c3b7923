"""References are computed from the contract's terms, never from the product's own schedule.

Every shipped product is subclassed with its observation dates (and so its exercise dates)
moved: a schedule bug shared by the payoff and everything built on its dates. The targets of
every check (the references of the reductions' base products, the bounds) must not move; the
Monte Carlo price does, so the check against the reference fails. Before, the Bermudan lattice
was built from the product's ``exercise_dates()``, the Asian closed forms from its ``dates()``
and the autocallable's first call date from ``dates()[0]``: every leg of a check moved
together with the bug and every check passed.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from limitcase.loader import load_products
from limitcase.reduce import checks_for
from limitcase.testing import assert_caught
from limitcase_payoffs.autocallable import Autocallable
from limitcase_payoffs.bermudan import BermudanPut

CATALOGUE = load_products(())


def _moved(cls):
    """``cls`` with every observation date at 90% of where its terms put it."""

    def dates(self):
        return 0.9 * cls.dates(self)

    return type(f"{cls.__name__}MovedDates", (cls,), {"dates": dates, "__module__": __name__})


@pytest.mark.parametrize("cls", CATALOGUE, ids=lambda c: c.__name__)
def test_no_target_moves_with_the_products_own_dates(cls):
    moved = _moved(cls)
    assert not np.allclose(moved().dates(), cls().dates())
    before = {c.case: c.target for c in checks_for(cls) if c.error is None and c.skip is None}
    after = {c.case: c.target for c in checks_for(moved) if c.error is None and c.skip is None}
    assert before.keys() == after.keys()
    for case, target in before.items():
        assert after[case] == target or (math.isnan(target) and math.isnan(after[case])), (
            f"{cls.__name__}/{case}: the target moved from {target!r} to {after[case]!r} with the product's dates"
        )


class BermudanPutShiftedExercise(BermudanPut):
    """The exercise schedule's rule written wrong: every date at 90% of the terms' date."""

    def dates(self):
        return 0.9 * super().dates()


class AutocallableShiftedDates(Autocallable):
    def dates(self):
        return 0.9 * super().dates()


@pytest.mark.parametrize("broken, case", [
    (BermudanPutShiftedExercise, "lattice"),
    (AutocallableShiftedDates, "called_on_first_date"),
])
def test_the_monte_carlo_price_moves_and_the_check_fails(broken, case):
    assert_caught(broken, case, paths=20_000)
