"""Range accrual: every declared check passes and every declared check catches a
realistic bug (one broken twin per check)."""

from __future__ import annotations

import numpy as np
import pytest

from limitcase import BlackScholes
from limitcase.testing import assert_all_pass, assert_caught, assert_every_check_has_a_twin
from limitcase_payoffs.range_accrual import RangeAccrual

PRODUCTS = [RangeAccrual]


def test_every_declared_check_passes():
    assert_all_pass(RangeAccrual, paths=10_000)


class CountsTodayInTheDenominator(RangeAccrual):
    """Divides by n + 1 (today counted as a fixing) while accruing on the n dates."""

    def payoff(self, obs):
        inside = (obs.s >= self.lower) & (obs.s <= self.upper)
        return self.cash * inside.sum(axis=1) / (obs.s.shape[1] + 1)


class OrInsteadOfAnd(RangeAccrual):
    """Tests S >= L or S <= U (or for and): every fixing accrues."""

    def payoff(self, obs):
        inside = (obs.s >= self.lower) | (obs.s <= self.upper)
        return self.cash * inside.mean(axis=1)


class UpperIgnored(RangeAccrual):
    """Accrues whenever S >= L, forgetting the upper level."""

    def payoff(self, obs):
        return self.cash * (obs.s >= self.lower).mean(axis=1)


class CountsOutside(RangeAccrual):
    """Accrues on the fixings outside the corridor."""

    def payoff(self, obs):
        inside = (obs.s >= self.lower) & (obs.s <= self.upper)
        return self.cash * (~inside).mean(axis=1)


class SumNotFraction(RangeAccrual):
    """Pays C per fixing in the corridor instead of C times the fraction."""

    def payoff(self, obs):
        inside = (obs.s >= self.lower) & (obs.s <= self.upper)
        return self.cash * inside.sum(axis=1)


class OpenCorridor(RangeAccrual):
    """Compares strictly, L < S < U: a fixing exactly on a level does not accrue."""

    def payoff(self, obs):
        inside = (obs.s > self.lower) & (obs.s < self.upper)
        return self.cash * inside.mean(axis=1)


BROKEN = [
    (OpenCorridor, "fixings_on_the_levels"),
    (OpenCorridor, "tie_at_lower"),
    (OpenCorridor, "tie_at_upper"),
    (CountsTodayInTheDenominator, "corridor_whole_line"),
    (OrInsteadOfAnd, "empty_corridor"),
    (OrInsteadOfAnd, "one_fixing_digital"),
    (CountsTodayInTheDenominator, "closed_form"),
    (UpperIgnored, "closed_form"),
    (CountsOutside, "closed_form_no_lower"),
    (UpperIgnored, "corridors_add_up"),
    (CountsOutside, "increasing_in_upper"),
    (SumNotFraction, "at_most_bond"),
]


@pytest.mark.parametrize("broken, case", BROKEN, ids=lambda x: x if isinstance(x, str) else x.__name__)
def test_broken_twin_is_caught(broken, case):
    assert_caught(broken, case, paths=10_000)


def test_every_declared_check_has_a_broken_twin():
    assert_every_check_has_a_twin(PRODUCTS, BROKEN)


def test_reference_reads_the_terms_not_the_schedule():
    class FixingsFromTheStart(RangeAccrual):
        def dates(self):
            return self.maturity * np.arange(0, self.fixings) / self.fixings + 1e-9

    assert FixingsFromTheStart().reference(BlackScholes()) == RangeAccrual().reference(BlackScholes())
    assert_caught(FixingsFromTheStart, "closed_form", paths=10_000)
