"""Same seed, same numbers: whatever the batch size, the number of workers, the round
structure of a precision run, and for every sampling method."""

import numpy as np
import pytest

from limitcase import BLOCK, evaluate
from limitcase.engine import PathRule
from limitcase.loader import load_products
from limitcase.models.merton import Merton
from limitcase.reduce import Check, checks_for
from limitcase.references import merton_jump_price
from limitcase.suite import run_checks
from limitcase_payoffs.asians import ArithmeticAsianCall
from limitcase_payoffs.bermudan import BermudanPut
from limitcase_payoffs.vanilla import EuropeanCall, EuropeanPut

from .conftest import MODEL, call_check

METHODS = ["plain", "antithetic", "sobol", "control", "control+antithetic", "control+sobol"]


def _numbers(joint):
    return joint.mean.tolist(), joint.cov.tolist(), joint.estimate([1.0] * len(joint.mean)), \
        [(r.violations, r.worst, r.worst_path) for r in joint.rules]


@pytest.mark.parametrize("method", METHODS)
def test_batch_size_does_not_change_numbers(method):
    p = ArithmeticAsianCall(fixings=12)
    runs = [evaluate([p, EuropeanCall()], MODEL, paths=3 * BLOCK + 96, seed=7, method=method, batch=b,
                     rules=[PathRule((1.0, -1.0), ">=")]) for b in (BLOCK, 2 * BLOCK, 100 * BLOCK)]
    assert _numbers(runs[0]) == _numbers(runs[1]) == _numbers(runs[2])
    assert runs[0].method.endswith(method.split("+")[-1]) or method == "control"


@pytest.mark.parametrize("method", ["plain", "antithetic", "sobol"])
def test_longer_runs_extend_shorter_ones(method):
    """Block 0 of a one-block run is block 0 of a three-block run, under every sampler
    (the Sobol scrambles continue their sequences)."""
    seen = []

    class Spy(EuropeanCall):
        def payoff(self, obs):
            seen.append(obs.s[: obs.paths, -1].copy())
            return super().payoff(obs)

    evaluate([Spy()], MODEL, paths=BLOCK, seed=5, method=method)
    evaluate([Spy()], MODEL, paths=3 * BLOCK, seed=5, method=method)
    assert np.array_equal(seen[0], seen[1])
    assert not np.array_equal(seen[1], seen[2])


def test_sobol_blocks_do_not_depend_on_history():
    """A scramble's generator is sequential and cached per process; asking for a block out
    of order (after other cases moved the generator) gives the same points."""
    p = ArithmeticAsianCall(fixings=12)
    a = evaluate([p], MODEL, paths=2 * BLOCK, seed=9, method="sobol")
    evaluate([p], MODEL, paths=5 * BLOCK, seed=9, method="sobol", key=3)  # moves the shared scrambles on
    b = evaluate([p], MODEL, paths=2 * BLOCK, seed=9, method="sobol")
    assert _numbers(a) == _numbers(b)
    from limitcase import sampling

    sampling._BLOCKS.clear()  # the per-process cache of Sobol blocks changes nothing either
    sampling._BLOCK_BYTES[0] = 0
    sampling._ENGINES.clear()
    c = evaluate([p], MODEL, paths=2 * BLOCK, seed=9, method="sobol")
    assert _numbers(a) == _numbers(c)


def _merton_check():
    m = Merton(spot=100.0, rate=0.05, dividend=0.0, vol=0.2, intensity=1.0, jump_mean=-0.1, jump_vol=0.15)
    ref = float(merton_jump_price(100.0, 100.0, 1.0, 0.05, 0.0, 0.2, 1.0, -0.1, 0.15, "call"))
    return Check(product="EuropeanCall", case="merton_series", kind="reduction", legs=(EuropeanCall(),), model=m,
                 weights=(1.0,), target=ref, target_source="Merton (1976) Poisson series")


def _mixed_checks():
    bermudan = [c for c in checks_for(BermudanPut) if c.case == "one_exercise_date"]
    bermudan += [Check(product="BermudanPut", case="priced_with_put", kind="relation",
                       legs=(BermudanPut(), EuropeanPut()), model=MODEL, weights=(1.0, -1.0), target=0.0,
                       sense=">=", rules=(PathRule((1.0, -1.0), ">="),))]
    return bermudan + [_merton_check(), call_check()] + [c for c in checks_for(ArithmeticAsianCall)][:3]


@pytest.mark.parametrize("method", ["plain", "auto"])
def test_workers_do_not_change_numbers(method):
    """One process and two forked workers give identical outcomes, for a Longstaff-Schwartz
    Bermudan (policy fitted in a worker and shipped), a Merton model (jumps drawn from the
    block's generator) and Asians under control variates and Sobol points."""
    checks = _mixed_checks()
    one = run_checks(checks, paths=3 * BLOCK, seed=11, method=method, workers=1, regression_paths=8192)
    two = run_checks(checks, paths=3 * BLOCK, seed=11, method=method, workers=2, regression_paths=8192)
    assert one.extra["processes"] == 1 and two.extra["processes"] == 2  # really forked
    assert [o.to_dict() for o in one.outcomes] == [o.to_dict() for o in two.outcomes]
    assert all(o.verdict != "error" for o in one.outcomes), [o.message for o in one.outcomes]


def test_precision_run_equals_fixed_run_with_its_final_paths():
    """Adaptive path counts stay reproducible: each check's numbers are those of a fixed
    run with the path count the precision run ended on."""
    checks = [call_check(), _merton_check()]
    adaptive = run_checks(checks, paths=BLOCK, seed=3, method="antithetic", precision=0.15, max_paths=100 * BLOCK)
    priced = adaptive.outcomes[: len(checks)]  # then the run's audits of the two models
    assert [o.kind for o in adaptive.outcomes[len(checks):]] == ["audit", "audit"]
    assert all(o.precision_status == "reached" for o in priced)
    assert all(o.paths > BLOCK for o in priced)  # it did add paths
    for check, o in zip(checks, adaptive.outcomes):
        fixed = run_checks([check], paths=o.paths, seed=3, method="antithetic").outcomes[0]
        assert (fixed.value, fixed.stderr, fixed.paths) == (o.value, o.stderr, o.paths)
    again = run_checks(checks, paths=BLOCK, seed=3, method="antithetic", precision=0.15, max_paths=100 * BLOCK,
                       workers=2)
    assert [o.to_dict() for o in adaptive.outcomes] == [o.to_dict() for o in again.outcomes]


def test_products_from_user_files_work_in_workers(tmp_path):
    """A product defined in a file of the user's own is found by forked workers."""
    f = tmp_path / "my_products.py"
    f.write_text(
        "import numpy as np\n"
        "from limitcase import Param, Product, Reduction\n"
        "from limitcase_payoffs.vanilla import EuropeanCall\n\n"
        "class CappedCall(Product):\n"
        "    strike = Param(100.0, low=0.0)\n"
        "    cap = Param(float('inf'), low=0.0)\n"
        "    maturity = Param(1.0, low=0.0, low_open=True)\n"
        "    reductions = (Reduction('no_cap', {'cap': float('inf')}, becomes=lambda p: EuropeanCall(strike=p.strike)),)\n"
        "    def dates(self):\n"
        "        return np.array([self.maturity])\n"
        "    def payoff(self, obs):\n"
        "        return np.minimum(np.maximum(obs.s[:, -1] - self.strike, 0.0), self.cap)\n"
    )
    products = load_products([f])
    checks = [c for p in products for c in checks_for(p)] + [call_check()]
    one = run_checks(checks, paths=2 * BLOCK, seed=1, method="auto", workers=1)
    two = run_checks(checks, paths=2 * BLOCK, seed=1, method="auto", workers=2)
    assert two.extra["processes"] == 2
    assert [o.to_dict() for o in one.outcomes] == [o.to_dict() for o in two.outcomes]
    assert one.outcomes[0].product == "CappedCall" and one.outcomes[0].verdict == "pass"


def test_different_seeds_and_cases_differ():
    a = evaluate([EuropeanCall()], MODEL, paths=BLOCK, seed=1, method="sobol").estimate([1.0])
    b = evaluate([EuropeanCall()], MODEL, paths=BLOCK, seed=2, method="sobol").estimate([1.0])
    assert a.value != b.value
    c = evaluate([EuropeanCall()], MODEL, paths=BLOCK, seed=1, method="antithetic", key=4).estimate([1.0])
    d = evaluate([EuropeanCall()], MODEL, paths=BLOCK, seed=1, method="antithetic", key=5).estimate([1.0])
    assert c.value != d.value


def test_no_pools_inside_workers():
    """A check run inside a worker (a product whose reference runs checks of its own, the
    mutation command's workers) runs in that process instead of forking again."""
    from limitcase import workers

    workers._mark_worker()
    try:
        r = run_checks([call_check(), call_check(case="twin")], paths=BLOCK, seed=1, workers=2)
        assert r.extra["processes"] == 1
    finally:
        workers._IN_WORKER = False


def test_one_process_where_fork_is_missing(monkeypatch):
    """Where the platform cannot fork, a run asked for two workers runs in this process, says
    so with a RuntimeWarning, and gives the same numbers."""
    import multiprocessing

    checks = [call_check(), call_check(case="twin")]
    ref = run_checks(checks, paths=BLOCK, seed=4, workers=1)
    monkeypatch.setattr(multiprocessing, "get_all_start_methods", lambda: ["spawn"])
    with pytest.warns(RuntimeWarning, match="cannot fork worker processes"):
        r = run_checks(checks, paths=BLOCK, seed=4, workers=2)
    assert r.extra["processes"] == 1
    assert [o.to_dict() for o in r.outcomes] == [o.to_dict() for o in ref.outcomes]
