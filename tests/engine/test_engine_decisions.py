"""The decision rule keeps its two promises, measured over many seeds.

False alarms: a correct check at alpha = 0.05 is rejected in 5% of runs. Power: a check
whose product is biased by exactly the detectable bias the run reports is rejected in 90%
of runs. Counts are compared with binomial intervals at 99.9% (scipy.stats.binom), so
each test fails by chance once in a thousand runs of the suite; the seeds are fixed.
"""

import math

import numpy as np
import pytest
from scipy import stats

from limitcase import BLOCK
from limitcase.suite import run_checks
from limitcase.verdict import POWER, detectable_bias, holm, p_value
from limitcase_payoffs.vanilla import EuropeanCall

from .conftest import CALL_REFERENCE, CallWithTwin, call_check

RUNS = 200
ALPHA = 0.05


def _interval(p: float, runs: int = RUNS) -> tuple[int, int]:
    lo, hi = stats.binom.interval(0.999, runs, p)
    return int(lo), int(hi)


class BiasedCall(EuropeanCall):
    """The call plus a fixed amount ``bias * exp(rT)`` paid at T: its price is the call's
    plus exactly ``bias`` (a payoff bug of known size)."""

    bias = 0.0
    nonnegative = False  # a downward bias can make the amount negative

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] - self.strike, 0.0) + self.bias * math.exp(obs.rate * self.maturity)


def _rejections(checks, runs=RUNS, **kw):
    count = 0
    for seed in range(runs):
        count += run_checks(checks, seed=seed, alpha=ALPHA, **kw).outcomes[0].verdict == "fail"
    return count


@pytest.mark.parametrize("method, runs", [("plain", RUNS), ("control+sobol", RUNS)])
def test_false_alarm_rate_is_nominal(method, runs):
    """The call carries a strong control, so control variates and Sobol points act together."""
    fails = _rejections([call_check(product=CallWithTwin())], runs=runs, paths=BLOCK, method=method)
    lo, hi = _interval(ALPHA, runs)
    assert lo <= fails <= hi, (fails, lo, hi)


def test_false_alarm_rate_under_precision_rounds():
    """Paths chosen from the standard error (here two to three rounds) leave the false-alarm
    rate at its nominal value (the sequential-testing caveat of limitcase.suite)."""
    fails = _rejections([call_check()], paths=BLOCK, method="antithetic", precision=0.2,
                           max_paths=64 * BLOCK)
    lo, hi = _interval(ALPHA)
    assert lo <= fails <= hi, (fails, lo, hi)


@pytest.mark.parametrize("method, sense, strong_control", [
    ("plain", "==", False), ("antithetic", ">=", False), ("control+sobol", "==", True)])
def test_power_at_the_detectable_bias_is_ninety_percent(method, sense, strong_control):
    """For each seed: run the correct check with a correct twin (Holm over 2) and read the
    detectable bias b it reports; then run the same seed with the product biased by b
    (downwards for the one-sided check, the direction it guards against). The constant
    does not change the standard error, so b is the detectable bias of the biased run too,
    and the detection rate must be the reported 90%. A wrong standard error (too large or
    too small) or a biased estimator moves the rate away from 90%. Under Sobol points the
    standard error has 31 degrees of freedom and the bias uses Student's t quantiles."""
    base = CallWithTwin if strong_control else EuropeanCall
    hits = 0
    for seed in range(RUNS):
        family = [call_check(product=base(), sense=sense), call_check(case="twin")]
        probe = run_checks(family, paths=BLOCK, seed=seed, alpha=ALPHA, method=method)
        b = probe.outcomes[0].detectable_bias
        biased = type("BiasedBy", (BiasedCall, base), {"bias": -b if sense == ">=" else b})
        family[0] = call_check(product=biased(), sense=sense)
        run = run_checks(family, paths=BLOCK, seed=seed, alpha=ALPHA, method=method)
        o = run.outcomes[0]
        assert o.detectable_bias == pytest.approx(b, rel=1e-9)
        assert o.method == probe.outcomes[0].method == ("control+sobol" if strong_control else method)
        hits += o.verdict == "fail"
    lo, hi = _interval(POWER)
    assert lo <= hits <= hi, (hits, lo, hi)


def test_p_values_against_scipy():
    assert p_value(0.3, 0.1, "==") == pytest.approx(2 * stats.norm.sf(3.0), rel=1e-12)
    assert p_value(0.3, 0.1, "==", allowance=0.1) == pytest.approx(2 * stats.norm.sf(2.0), rel=1e-12)
    assert p_value(0.05, 0.1, "==", allowance=0.1) == 1.0
    assert p_value(-0.3, 0.1, ">=", dof=31) == pytest.approx(stats.t.cdf(-3.0, 31), rel=1e-12)
    assert p_value(0.3, 0.1, "<=", dof=31) == pytest.approx(stats.t.sf(3.0, 31), rel=1e-12)
    assert p_value(0.3, 0.1, "==", dof=15) > p_value(0.3, 0.1, "==")  # heavier tails


def test_detectable_bias_formula():
    z = stats.norm.isf(0.01 / 10 / 2) + stats.norm.isf(0.1)
    assert detectable_bias(0.02, "==", 0.01, 10) == pytest.approx(z * 0.02, rel=1e-12)
    t = stats.t.isf(0.01 / 10, 31) + stats.t.isf(0.1, 31)
    assert detectable_bias(0.02, ">=", 0.01, 10, dof=31, allowance=0.05) == pytest.approx(0.05 + t * 0.02, rel=1e-12)


def test_holm_against_hand_computation():
    """Holm (1979): sorted p (0.01, 0.02, 0.04) with m = 3 -> 0.03, 0.04, 0.04."""
    assert holm([0.04, 0.01, 0.02]) == pytest.approx([0.04, 0.03, 0.04])


def test_json_record_carries_the_decision(tmp_path):
    r = run_checks([call_check(), call_check(target=CALL_REFERENCE + 1.0, case="off")], paths=BLOCK, seed=1,
                   method="auto")
    assert [o.kind for o in r.outcomes][-1] == "audit"  # the run's audit of its model, on plain paths
    for o in r.outcomes[:-1]:
        d = o.to_dict()
        for key in ("p_value", "p_adjusted", "detectable_bias", "detectable_relative", "method", "dof", "stderr"):
            assert d[key] is not None, key
        assert d["method"] == "sobol" and d["dof"] == 31  # the underlying explains < 90%: no control
        assert d["controls"] == []
    assert r.outcomes[1].verdict == "fail" and r.outcomes[0].verdict == "pass"


def test_a_sobol_block_of_a_count_not_a_power_of_two_prints_no_scipy_note():
    """A run whose one block holds a path count that is not a power of 2 (3,000 paths) drew
    its Sobol points outside the filter of scipy's note on balance, which then reached the
    user's terminal in every worker; the estimate is unbiased at any count (a scrambled
    point set, Owen 1997), so the note says nothing to act on."""
    import warnings

    from limitcase import BlackScholes, price
    from limitcase_payoffs.asians import ArithmeticAsianCall

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        est = price(ArithmeticAsianCall(), BlackScholes(), paths=3000, seed=1, method="sobol")
    assert est.paths >= 3000 and est.stderr > 0
