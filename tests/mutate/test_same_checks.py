"""A mutant whose changed statement the original's check building never runs takes the
original's checks with itself in the original's place (:mod:`limitcase.mutate.same_checks`):
they must be what building the mutant's checks afresh gives, case by case (names, kinds,
targets, allowances, weights, rules, skips, errors, legs and their parameters), for every
mutant of catalogue products whose declarations span closed forms of the product itself
(its own ``reference``), base products of other classes, relations, ties and interior
points; and a tie check must decide on the mutant."""

from __future__ import annotations

import pytest

from limitcase.interior import interior_checks
from limitcase.mutate import make_mutants
from limitcase.mutate.dead import mutated_lines, traced
from limitcase.mutate.same_checks import forget_originals, mutant_checks
from limitcase.reduce import checks_for
from limitcase_payoffs.asians import ArithmeticAsianCall
from limitcase_payoffs.autocallable import Autocallable
from limitcase_payoffs.barriers import DownAndOutCall
from limitcase_payoffs.bermudan import BermudanPut
from limitcase_payoffs.digitals import CashOrNothingCall
from limitcase_payoffs.double_barriers import DoubleKnockOutCallContinuous

SEED = 20261201


def _build(cls):
    found = checks_for(cls, None)
    broken = sorted({c.case for c in found if c.error is not None})
    return found + interior_checks(cls, None, seed=SEED, points=1, skip_cases=broken)


def _record(check, mutant_cls, original):
    legs = tuple(("MUTANT" if type(leg) is mutant_cls else
                  "ORIGINAL" if type(leg) is original else type(leg).__name__,
                  tuple(sorted(leg.params().items()))) for leg in check.legs)
    return (check.product, check.case, check.kind, legs, check.weights, check.target, check.target_source,
            check.sense, check.rules, check.allowance, check.allowance_reason, check.note, check.error,
            check.skip, check.origin, check.path_share, check.direct is None, check.allowance_weights)


@pytest.mark.parametrize("cls", [DownAndOutCall, CashOrNothingCall, ArithmeticAsianCall, BermudanPut,
                                 Autocallable, DoubleKnockOutCallContinuous])
def test_reused_checks_are_the_fresh_build(cls):
    forget_originals()
    reused_any = 0
    _, ran = traced(make_mutants(cls)[0][0].file, lambda: _build(cls))
    for m in make_mutants(cls)[0]:
        got = mutant_checks(m, _build)
        fresh = _build(m.cls)
        assert [_record(c, m.cls, cls) for c in got] == [_record(c, m.cls, cls) for c in fresh], m.id
        stmt = mutated_lines(m.file, m.mutation.line)
        reused_any += stmt is not None and not any(line in ran for line in stmt)
    assert reused_any  # the comparison covers reused checks, not only fresh builds
    forget_originals()


def test_a_tie_check_reused_for_a_mutant_decides_on_the_mutant():
    """``>`` made ``>=`` on the digital's strike: a statement of the payoff, which building
    the checks never runs; the reused tie check must fail on the mutant, as a fresh one does."""
    forget_originals()
    flipped = [m for m in make_mutants(CashOrNothingCall)[0] if ">=" in m.mutation.diff and "strike" in m.mutation.diff]
    assert flipped
    for m in flipped:
        ties = [c for c in mutant_checks(m, _build) if c.direct is not None]
        fresh = [c for c in _build(m.cls) if c.direct is not None]
        assert ties and [c.direct(c.legs)[0] for c in ties] == [c.direct(c.legs)[0] for c in fresh]
        assert any(c.direct(c.legs)[0] is False for c in ties)
    forget_originals()
