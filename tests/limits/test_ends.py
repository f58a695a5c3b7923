"""Every parameter end enumerated (limitcase.ends): a payoff wrong only at an undeclared end
is caught by continuity into it, the unmodified catalogue passes, bad declarations are
refused by name.

Sources: the quadratic extrapolation weights (3, -3, 1) of three equally spaced points to
the next one are Lagrange's interpolation formula (any numerical-analysis text, e.g. Burden
and Faires, Numerical Analysis, section 3.1); the gap call's payoff (S - K1 when S > K2) is
common practice (Haug, The Complete Guide to Option Pricing Formulas, gap options).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from limitcase import DeclarationError, EndJump, Param, Product
from limitcase.ends import END_WEIGHTS, end_checks, end_table, end_value
from limitcase.suite import run_checks
from limitcase_payoffs.digitals import GapCall
from limitcase_payoffs.vanilla import EuropeanCall, EuropeanPut

PATHS = 40_000


class GapCallZeroStrikeFallback(GapCall):
    """A gap call whose author wrote ``self.strike or self.trigger`` for a strike "not
    given": a strike of 0 is falsy in Python, so at the end strike=0 it pays S - K2 instead
    of S. Right at every other strike, wrong only at the end."""

    def payoff(self, obs):
        s = obs.s[:, -1]
        strike = self.strike or self.trigger
        return np.where(s > self.trigger, s - strike, 0.0)


def _run(checks):
    return run_checks(checks, paths=PATHS, seed=20261201)


def test_extrapolation_weights_are_lagrange():
    # quadratic through (1, f1), (2, f2), (3, f3) evaluated at 0: 3 f1 - 3 f2 + f3 (Lagrange)
    xs = np.array([1.0, 2.0, 3.0])
    for coeffs in ([1.0, 0.0, 0.0], [0.3, -2.0, 0.5], [4.0, 1.0, -1.5]):
        f = np.polyval(coeffs, xs)
        extrapolated = -sum(w * v for w, v in zip(END_WEIGHTS[1:], f))
        assert extrapolated == pytest.approx(np.polyval(coeffs, 0.0), abs=1e-12)


def test_table_statuses_of_a_gap_call():
    rows = {(r.param, r.side): r for r in end_table(GapCall)}
    assert rows[("strike", "low")].status == "enumerated"
    assert rows[("maturity", "low")].status == "open"  # (0, ...: not a value of the product
    far = rows[("strike", "high")]
    assert far.status == "enumerated" and math.isfinite(far.value) and far.value > 100.0
    assert rows[("strike", "low")].suggestion.startswith('Reduction("strike_to_zero", {"strike": 0}')
    # every declared row names the reduction that uses the end
    assert all("Reduction" in r.detail for r in rows.values() if r.status == "declared")


def test_far_value_of_an_infinite_end():
    spec = GapCall.param_specs()["strike"]
    assert end_value(spec, "high", 100.0) == pytest.approx(100.0 + 16.0 * 100.0)
    assert end_value(spec, "low", 100.0) == 0.0


def test_planted_bug_at_an_end_is_caught():
    checks = [c for c in end_checks(GapCallZeroStrikeFallback) if c.case == "end:strike.low"]
    assert len(checks) == 1
    out = _run(checks).outcomes[0]
    assert out.verdict == "fail", out


def test_the_same_end_passes_on_the_shipped_product():
    checks = [c for c in end_checks(GapCall) if c.case == "end:strike.low"]
    assert _run(checks).ok


@pytest.mark.parametrize("cls", [EuropeanCall, EuropeanPut, GapCall])
def test_catalogue_subset_passes(cls):
    checks = end_checks(cls)
    assert checks, cls
    result = _run(checks)
    assert result.ok, [(o.case, o.verdict, o.message) for o in result.outcomes if o.verdict != "pass"]


def test_declared_jump_gets_the_sign_check_only():
    class CappedCash(Product):
        """Pays 1 when S(T) is below the level; at level 0 never pays."""

        level = Param(100.0, low=0.0, doc="level")
        maturity = Param(1.0, low=0.0, low_open=True, doc="years")
        end_jumps = (EndJump("level", "low", reason="below 0 is never reached"),)

        def dates(self):
            return np.array([self.maturity])

        def payoff(self, obs):
            return (obs.s[:, -1] < self.level).astype(float)

    rows = {(r.param, r.side): r for r in end_table(CappedCash)}
    assert rows[("level", "low")].status == "jump"
    assert rows[("level", "low")].detail == "below 0 is never reached"
    cases = {c.case for c in end_checks(CappedCash)}
    assert "end:level.low:sign" in cases and "end:level.low" not in cases


def _declare(**kwargs):
    class Bad(Product):
        strike = Param(100.0, low=0.0, doc="strike")
        end_jumps = (EndJump(**kwargs),)

        def dates(self):
            return np.array([1.0])

        def payoff(self, obs):
            return obs.s[:, -1]

    return Bad


def test_jump_naming_a_missing_parameter_is_refused_by_name():
    with pytest.raises(DeclarationError) as err:
        _declare(param="strik", side="low", reason="r")
    text = str(err.value)
    assert "Bad" in text and "'strik'" in text and "did you mean 'strike'" in text


def test_jump_with_a_bad_side_or_no_reason_is_refused():
    with pytest.raises(DeclarationError, match="side='upper'.*'low' or 'high'"):
        _declare(param="strike", side="upper", reason="r")
    with pytest.raises(DeclarationError, match="needs a reason"):
        _declare(param="strike", side="low", reason=" ")


def test_jump_in_the_wrong_list_is_refused():
    with pytest.raises(DeclarationError, match="belongs in end_jumps"):
        class Misplaced(Product):
            strike = Param(100.0, low=0.0, doc="strike")
            relations = (EndJump("strike", "low", "r"),)

            def dates(self):
                return np.array([1.0])

            def payoff(self, obs):
                return obs.s[:, -1]


def test_listing_shows_every_end_with_its_status_and_suggestion():
    import json

    from click.testing import CliRunner

    from limitcase.cli import main

    run = CliRunner().invoke(main, ["list", "payoffs/digitals.py", "--json"])
    assert run.exit_code == 0, run.output
    gap = next(p for p in json.loads(run.output)["products"] if p["name"] == "GapCall")
    ends = {(e["param"], e["side"]): e for e in gap["ends"]}
    assert len(ends) == 2 * len(gap["params"])  # every end of every parameter
    assert ends[("strike", "low")]["status"] == "enumerated"
    assert ends[("trigger", "low")]["status"] in ("declared", "enumerated")
    assert all(e["detail"].startswith("Reduction") for e in ends.values() if e["status"] == "declared")
    text = CliRunner().invoke(main, ["list", "payoffs/asians.py"]).output
    assert "ends:" in text and "to declare" in text and "suggestion: Reduction(" in text


def test_description_for_the_dossier_carries_every_end():
    from limitcase.document import describe_product

    from limitcase_payoffs.digitals import CashOrNothingCall

    desc = describe_product(CashOrNothingCall)
    assert {(e.param, e.side) for e in desc.ends} == {(p, s) for p in CashOrNothingCall.param_specs()
                                                      for s in ("low", "high")}
    statuses = {(e.param, e.side): e.status for e in desc.ends}
    assert statuses[("strike", "low")] == "declared"  # the zero_strike reduction
    assert statuses[("cash", "low")] == "enumerated" and statuses[("maturity", "low")] == "open"


def test_dates_failing_only_at_an_end_is_an_error_of_that_end():
    class ShortSchedule(Product):
        """Fixings every quarter of the window; the author's dates() divides by the start."""

        start = Param(0.5, low=0.0, high=0.9, doc="start of the window")
        maturity = Param(1.0, low=0.0, low_open=True, doc="years")

        def dates(self):
            ratio = self.maturity / self.start  # ZeroDivisionError at start=0
            return self.start + (self.maturity - self.start) * np.arange(1, 5) / 4 * ratio / ratio

        def payoff(self, obs):
            return obs.s[:, -1]

    rows = {(r.param, r.side): r for r in end_table(ShortSchedule)}
    assert rows[("start", "low")].status == "enumerated"  # not hidden as unreachable
    result = _run([c for c in end_checks(ShortSchedule) if c.case == "end:start.low"])
    assert result.outcomes[0].verdict == "error" and "ZeroDivisionError" in result.outcomes[0].message
