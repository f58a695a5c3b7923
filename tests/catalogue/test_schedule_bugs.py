"""Schedule bugs shared by a product and everything built on its dates are caught once the
references read the contract's terms (the first family of misses measured by mutation
testing: a wrong schedule moved every leg of every check together)."""

from __future__ import annotations

import numpy as np
import pytest

from limitcase.references.schedules import equal_steps
from limitcase.testing import assert_caught
from limitcase_payoffs.asians import GeometricAsianCall, GeometricAsianPut
from limitcase_payoffs.autocallable import DigitalCouponNote


def _drops_last_step(p):
    """The window's last step left out: n fixings over (start, T - step], an off-by-one."""
    n = p.fixings
    return p.start + (p.maturity - p.start) * np.arange(1, n + 1) / (n + 1)


class GeometricCallShortWindow(GeometricAsianCall):
    dates = _drops_last_step


class GeometricPutShortWindow(GeometricAsianPut):
    dates = _drops_last_step


class NoteWithHalfYearDates(DigitalCouponNote):
    def dates(self):  # observations bunched into the first half of the life
        return 0.5 * self.maturity * np.arange(1, self.observations + 1) / self.observations


@pytest.mark.parametrize("broken, case", [
    (GeometricCallShortWindow, "closed_form"),
    (GeometricPutShortWindow, "closed_form"),
    (NoteWithHalfYearDates, "closed_form"),
])
def test_a_schedule_bug_is_caught_by_the_terms_reference(broken, case):
    assert_caught(broken, case)


def test_equal_steps_reads_the_usual_rule():
    """n equally spaced dates over (start, T], the last exactly at T (common practice)."""
    np.testing.assert_allclose(equal_steps(1.0, 4), [0.25, 0.5, 0.75, 1.0], rtol=0, atol=1e-15)
    np.testing.assert_allclose(equal_steps(2.0, 2, start=1.0), [1.5, 2.0], rtol=0, atol=1e-15)
    assert equal_steps(0.3, 7)[-1] == 0.3
