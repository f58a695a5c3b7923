"""The sympy cross-check (limitcase.symbolic): stated formulas against the numpy payoffs,
edge paths, and recognition of the base case at a limit.

The formulas are the textbook payoff definitions (Hull, Options, Futures, and Other
Derivatives, exotic options chapter), in tests/dossier/formula_products.py.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
import sympy as sp

from limitcase import Param, Product
from limitcase.loader import load_products
from limitcase.symbolic import (
    compact_instance,
    cross_check,
    formula_symbols,
    recognise,
    substituted,
    to_latex,
)
from limitcase.report.plots import formula_png

HERE = Path(__file__).resolve().parent
P = {c.__name__: c for c in load_products([HERE / "formula_products.py"])}


@pytest.mark.parametrize("name", ["CallWithFormula", "PutWithFormula", "AsianWithFormula", "KnockOutWithFormula"])
def test_code_agrees_with_formula_on_generated_and_edge_paths(name):
    r = cross_check(P[name](), paths=1500)
    assert r.status == "agree", r.message
    assert r.paths == 1500 and r.edge_paths > 0
    assert r.mismatches == 0 and r.edge_mismatches == 0


def test_edge_paths_catch_a_bug_random_paths_miss():
    r = cross_check(P["CashDigitalAtStrikeBug"](), paths=1500)
    assert r.status == "disagree"
    assert r.mismatches == 0          # no generated path ends exactly at the strike
    assert r.edge_mismatches > 0      # the paths ending at S_T = K show it
    assert r.payoff_value == 1.0 and r.formula_value == 0.0
    assert r.worst_prices[-1] == 100.0
    assert "kink" in r.worst_kind or "equal to 100" in r.worst_kind


def test_knock_out_edge_paths_touch_the_barrier_at_each_date():
    p = P["KnockOutWithFormula"](monitoring=4)
    r = cross_check(p, paths=200)
    assert r.status == "agree", r.message
    # one family of edge paths per date (S_j = H), per_kink paths each, plus flat paths
    assert r.edge_paths >= 4 * 3

    class TouchKeepsAlive(type(p)):  # '<=' where the definition knocks out at S >= H
        def payoff(self, obs):
            s = np.column_stack([np.full(obs.paths, obs.s0), obs.s])
            alive = np.all(s <= self.barrier, axis=1)
            return np.where(alive, np.maximum(obs.s[:, -1] - self.strike, 0.0), self.rebate)

    bad = cross_check(TouchKeepsAlive(monitoring=4), paths=200)
    assert bad.status == "disagree" and bad.mismatches == 0 and bad.edge_mismatches > 0


def test_asian_with_one_fixing_is_recognised_as_the_call():
    rec = recognise(P["AsianWithFormula"](), P["AsianWithFormula"].reductions[0])
    assert rec.status == "equal", rec.message
    s1, k = sp.Symbol("S_1", positive=True), sp.Symbol("K")
    # the limit formula is max(S_1 - 100, 0) (strike substituted)
    assert sp.simplify(rec.limit_formula - sp.Max(s1 - 100, 0)) == 0
    assert k not in rec.limit_formula.free_symbols


def test_barrier_at_infinity_is_recognised_as_the_call():
    rec = recognise(P["KnockOutWithFormula"](), P["KnockOutWithFormula"].reductions[0])
    assert rec.status == "equal", rec.message


def test_a_wrong_base_case_is_shown_to_differ():
    rec = recognise(P["AsianWrongBase"](), P["AsianWrongBase"].reductions[0])
    assert rec.status == "differs"
    assert "differs" in rec.message


def test_missing_formula_is_not_applicable():
    from limitcase_payoffs.asians import GeometricAsianPut

    red = GeometricAsianPut.reductions[1]
    rec = recognise(GeometricAsianPut(), red)
    assert rec.status == "n/a"
    assert cross_check(GeometricAsianPut()).status == "none"


def test_catalogue_formulas_agree_and_recognise_their_base_case():
    from limitcase_payoffs.asians import ArithmeticAsianCall

    assert cross_check(ArithmeticAsianCall()).status == "agree"
    one_fixing = next(r for r in ArithmeticAsianCall.reductions if r.name == "one_fixing")
    assert recognise(ArithmeticAsianCall(), one_fixing).status == "equal"


def test_unknown_symbol_and_non_sympy_formula_are_errors():
    class Stray(Product):
        strike = Param(100.0, low=0.0)

        def dates(self):
            return np.array([1.0])

        def payoff(self, obs):
            return np.maximum(obs.s[:, -1] - self.strike, 0.0)

        def formula(self):
            return sp.Max(sp.Symbol("S_1") - sp.Symbol("K"), 0)  # K is not a parameter name

    r = cross_check(Stray())
    assert r.status == "error" and "'K'" in r.message and "strike" in r.message

    class NotSympy(Stray):
        def formula(self):
            return "max(S_1 - strike, 0)"  # text is never parsed

    r = cross_check(NotSympy())
    assert r.status == "error" and "sympy expression" in r.message


def test_parameters_substitute_by_name_and_infinity_becomes_oo():
    p = P["KnockOutWithFormula"](barrier=math.inf, monitoring=2)
    expr = substituted(p)
    assert sp.oo not in expr.free_symbols and not any(s.name == "barrier" for s in expr.free_symbols)
    assert sp.simplify(expr - sp.Max(sp.Symbol("S_2", positive=True) - 100, 0)) == 0


def test_module_never_parses_text():
    src = (Path(__import__("limitcase.symbolic").symbolic.__file__)).read_text()
    assert "sympify(" not in src and "parse_expr" not in src


def test_display_is_compact_and_typesets_offline():
    shown, note = compact_instance(P["KnockOutWithFormula"]())
    assert shown.monitoring == 3 and "monitoring=52" in note
    latex = to_latex(shown.formula())
    assert "cases" not in latex and r"\mathrm{barrier}" in latex
    png = formula_png(latex)
    assert png is not None and png[:8] == b"\x89PNG\r\n\x1a\n"
    assert formula_png(r"\begin{cases} x \end{cases}") is None  # mathtext cannot: caller falls back to text


def test_formula_symbols_follow_the_dates():
    x = formula_symbols(P["AsianWithFormula"](fixings=5))
    assert [s.name for s in x.S] == [f"S_{j}" for j in range(1, 6)]
    assert x.S_T.name == "S_5" and x.S_0.name == "S_0" and x.strike.name == "strike"


def test_multi_asset_formula_uses_asset_and_date_symbols():
    from limitcase.models import MultiBlackScholes

    class Exchange(Product):
        """Pays max(S1(T) - S2(T), 0) (Margrabe's exchange option)."""

        multi_asset = True
        n_assets = 2
        maturity = Param(1.0, low=0.0, low_open=True)

        def dates(self):
            return np.array([0.5, self.maturity])

        def payoff(self, obs):
            return np.maximum(obs.s[:, -1, 0] - obs.s[:, -1, 1], 0.0)

        def scenario(self):
            return MultiBlackScholes(spots=(100.0, 95.0), vols=(0.2, 0.3), correlation=0.4)

        def formula(self):
            x = formula_symbols(self)
            s1, s2 = x.S_T
            return sp.Max(s1 - s2, 0)

    x = formula_symbols(Exchange())
    assert [[s.name for s in row] for row in x.S] == [["S1_1", "S2_1"], ["S1_2", "S2_2"]]
    assert [s.name for s in x.S_0] == ["S1_0", "S2_0"]
    r = cross_check(Exchange(), paths=500)
    assert r.status == "agree", r.message
    assert r.edge_paths > 0  # paths where S1(T) = S2(T) exactly

    class Swapped(Exchange):
        def payoff(self, obs):
            return np.maximum(obs.s[:, -1, 1] - obs.s[:, -1, 0], 0.0)

    assert cross_check(Swapped(), paths=500).status == "disagree"


def test_nonlinear_kink_of_a_geometric_average_is_solved_for_edge_paths():
    from limitcase_payoffs.asians import GeometricAsianCall

    class Geometric(GeometricAsianCall):
        def formula(self):
            x = formula_symbols(self)
            return sp.Max(sp.Mul(*x.S) ** sp.Rational(1, len(x.S)) - x.strike, 0)

    r = cross_check(Geometric(fixings=4), paths=300, per_kink=3)
    assert r.status == "agree", r.message
    # G = K is not linear in any S_j: sympy.solve gives S_j = K^4 / (product of the others),
    # one family of 3 paths per fixing, beside the flat paths at each positive parameter
    flat = sum(1 for v in Geometric(fixings=4).params().values() if isinstance(v, (int, float)) and v > 0)
    assert r.edge_paths == 4 * 3 + flat
