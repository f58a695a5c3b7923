"""The mutants of a point share its simulated paths and the original's present values
(:mod:`limitcase.mutate.shared`): the joint statistics must be those of a fresh joint run of
``[mutant, original]`` through the engine, bit for bit, for the first mutant of a point and
for the later ones that reuse what the first kept; with early exercise (each side fits its
own policy on the common pilot), with the uniforms of a lookback's Brownian-bridge extremes,
and under a stochastic-volatility model."""

from __future__ import annotations

import numpy as np
import pytest

from limitcase import BlackScholes
from limitcase.engine import case_key, evaluate
from limitcase.models.heston import Heston
from limitcase.mutate import make_mutants
from limitcase.mutate.equivalence import EQUIVALENCE_REGRESSION_PATHS, TOLERANCE
from limitcase.mutate.shared import clear_shared, joint_with_original
from limitcase_payoffs.barriers import DownAndOutCall
from limitcase_payoffs.bermudan import BermudanPut
from limitcase_payoffs.lookbacks import FloatingLookbackCall


def _same(a, b) -> None:
    assert a.paths == b.paths
    np.testing.assert_array_equal(a.mean, b.mean)
    np.testing.assert_array_equal(a.cov, b.cov)
    assert [(r.violations, r.worst, r.worst_path) for r in a.rules] == \
        [(r.violations, r.worst, r.worst_path) for r in b.rules]
    assert a.paying == b.paying


@pytest.mark.parametrize("cls, model", [
    (DownAndOutCall, None),
    (BermudanPut, None),
    (FloatingLookbackCall, None),
    (DownAndOutCall, Heston()),
])
def test_shared_paths_give_the_engine_s_numbers_bit_for_bit(cls, model):
    clear_shared()
    original = cls()
    model = original.scenario() if model is None else model
    mutants = [m for m in make_mutants(cls)[0]][:4]
    assert len(mutants) >= 2
    key = case_key(cls.__name__, "mutation-equivalence", "0")
    kw = dict(paths=8192, seed=7, key=key, regression_paths=EQUIVALENCE_REGRESSION_PATHS)
    seen_any_difference = False
    for m in mutants:  # the first fills the point, the others reuse it
        mutant = m.cls(**original.params())
        try:
            fresh = evaluate([mutant, original], model, rules=(TOLERANCE,), **kw)
        except Exception as exc:  # a mutant that cannot be priced raises the same here
            with pytest.raises(type(exc)):
                joint_with_original(mutant, original, model, rule=TOLERANCE, **kw)
            continue
        shared = joint_with_original(mutant, original, model, rule=TOLERANCE, **kw)
        _same(shared, fresh)
        seen_any_difference |= shared.rules[0].violations > 0
    assert seen_any_difference  # the comparison is not vacuous: some mutant pays differently
    clear_shared()
