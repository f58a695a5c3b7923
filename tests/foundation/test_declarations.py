"""Declarations are validated when the product class is defined, with messages naming the
class, the declaration and the closest parameter name; what only shows when the checks are
built (a `becomes` returning a number, a bound evaluating to NaN) is an error row naming it."""

from __future__ import annotations

import math

import numpy as np
import pytest

from limitcase import Bound, Convex, Identity, Monotone, Param, Product, Reduction, checks_for
from limitcase.errors import DeclarationError, ParamError
from limitcase.testing import run_product


class _Call(Product):
    abstract = True
    spot = 100.0
    strike = Param(100.0, low=0.0, doc="strike")
    barrier = Param(math.inf, low=0.0, doc="up-and-out barrier")
    maturity = Param(1.0, low=0.0, low_open=True, doc="years")

    def dates(self):
        return np.array([self.maturity])

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] - self.strike, 0.0)


def _vanilla(p):
    return _Call()


def test_reduction_setting_an_unknown_parameter_names_class_case_and_suggestion():
    with pytest.raises(DeclarationError) as info:
        class UpAndOutCall(_Call):
            reductions = (Reduction("no_barrier", {"barier": math.inf}, becomes=_vanilla),)
    assert str(info.value) == (
        "UpAndOutCall: Reduction 'no_barrier' sets 'barier', which is not a parameter; did you mean 'barrier'?"
    )


def test_unknown_parameter_with_no_close_match_lists_the_parameters():
    with pytest.raises(DeclarationError, match=r"Wrong: Reduction 'x' sets 'colour', which is not a parameter; "
                                               r"its parameters are: strike, barrier, maturity"):
        class Wrong(_Call):
            reductions = (Reduction("x", {"colour": 1.0}, becomes=_vanilla),)


def test_monotone_naming_a_missing_parameter():
    with pytest.raises(DeclarationError, match=r"Strikey: Monotone 'increasing_in_strik' names 'strik', which is "
                                               r"not a parameter; did you mean 'strike'\?"):
        class Strikey(_Call):
            relations = (Monotone("strik", +1, to=110.0),)


def test_convex_naming_a_missing_parameter():
    with pytest.raises(DeclarationError, match=r"Bent: Convex 'convex_in_strke' names 'strke'.*did you mean 'strike'"):
        class Bent(_Call):
            relations = (Convex("strke", step=5.0),)


@pytest.mark.parametrize("direction", [0, 2, True, 0.5])
def test_monotone_direction_must_be_plus_or_minus_one(direction):
    with pytest.raises(DeclarationError, match=rf"Flat: Monotone .* has direction={direction!r}; use \+1"):
        class Flat(_Call):
            relations = (Monotone("strike", direction, to=110.0),)


def test_bound_side_must_be_an_inequality():
    with pytest.raises(DeclarationError, match=r"Capped: Bound 'below_spot' has side='=>'; use '>=' or '<='; "
                                               r"did you mean '>='\?"):
        class Capped(_Call):
            relations = (Bound("below_spot", "=>", lambda p, m: 100.0),)


def test_two_checks_of_one_name():
    with pytest.raises(DeclarationError, match=r"Twice: two checks are named 'same' \(Reduction 'same' and "
                                               r"Monotone 'same'\)"):
        class Twice(_Call):
            reductions = (Reduction("same", {"barrier": math.inf}, becomes=_vanilla),)
            relations = (Monotone("strike", -1, to=110.0, name="same"),)


def test_default_monotone_names_clash_too():
    with pytest.raises(DeclarationError, match=r"two checks are named 'decreasing_in_strike'"):
        class Again(_Call):
            relations = (Monotone("strike", -1, to=110.0), Monotone("strike", -1, to=120.0))


def test_a_relation_in_reductions_is_refused():
    with pytest.raises(DeclarationError, match=r"Mixed.reductions\[0\] is a Monotone, which belongs in relations"):
        class Mixed(_Call):
            reductions = (Monotone("strike", -1, to=110.0),)


def test_parameter_default_outside_its_range_says_it_is_the_default():
    with pytest.raises(DeclarationError) as info:
        class Negative(_Call):
            rebate = Param(-1.0, low=0.0, doc="paid on knock-out")
    text = str(info.value)
    assert text.startswith("Negative: the default of parameter 'rebate' is invalid: rebate=-1.0 is outside [0, inf]")
    assert "declared as rebate = Param(-1.0, ...)" in text and __name__ in text
    assert "test_declarations.py, line " in text  # where the class is


def test_integer_parameter_with_fractional_default():
    with pytest.raises(DeclarationError, match=r"Counted: the default of parameter 'fixings' is invalid: "
                                               r"fixings=2.5 is not a whole number"):
        class Counted(_Call):
            fixings = Param(2.5, low=1, integer=True)


def test_valid_declarations_still_define_the_class():
    class Fine(_Call):
        reductions = (Reduction("no_barrier", {"barrier": math.inf}, becomes=_vanilla),)
        relations = (Monotone("strike", -1, to=110.0), Convex("strike", step=5.0),
                     Bound("below_spot", "<=", lambda p, m: 100.0),
                     Identity("self", lambda p: [(1.0, p), (-1.0, p)]))

    assert [c.case for c in checks_for(Fine)] == [  # _Call has no reference: a skip, its legs still compared
        "no_barrier:legs", "no_barrier", "decreasing_in_strike", "convex_in_strike", "below_spot", "self"]


def test_declaration_errors_are_param_errors():
    # callers catching ParamError (or ValueError) for bad declarations keep working
    assert issubclass(DeclarationError, ParamError) and issubclass(DeclarationError, ValueError)


# --- what only shows when the checks are built -------------------------------------------


def test_becomes_returning_a_number_is_an_error_naming_the_check():
    class PriceNotProduct(_Call):
        reductions = (Reduction("zero_strike", {"strike": 0.0}, becomes=lambda p: 100.0),)

    (check,) = checks_for(PriceNotProduct)
    assert check.error is not None and "AttributeError" not in check.error
    assert check.error.startswith("PriceNotProduct: Reduction 'zero_strike': becomes returned 100.0 (a float), "
                                  "not a Product")
    r = run_product(PriceNotProduct, paths=1000)
    assert r.outcomes[0].verdict == "error" and "becomes returned 100.0" in r.outcomes[0].message


def test_relation_naming_a_missing_parameter_after_definition_is_a_clear_error():
    # a declaration attached after the class statement escapes the class-time validation;
    # building its check still names the class, the declaration and the parameter
    class Late(_Call):
        pass

    Late.relations = (Monotone("strik", -1, to=110.0),)
    (check,) = checks_for(Late)
    assert check.error == ("Late: Monotone 'decreasing_in_strik' names 'strik', which is not a parameter; "
                           "did you mean 'strike'?")
    assert "KeyError" not in check.error


def test_bound_evaluating_to_nan_is_an_error_not_a_fail():
    class NanBound(_Call):
        relations = (Bound("below_nothing", "<=", lambda p, m: float("nan")),)

    (check,) = checks_for(NanBound)
    assert check.error is not None and "NaN" in check.error and "below_nothing" in check.error
    r = run_product(NanBound, paths=1000)
    assert r.outcomes[0].verdict == "error" and "evaluates to NaN" in r.outcomes[0].message


def test_a_relation_of_ones_own_not_derived_from_relation_is_still_accepted():
    class Parity:  # anything with checks(product, model), as before validation existed
        def checks(self, product, model):
            return Identity("own", lambda p: [(1.0, p), (-1.0, p)]).checks(product, model)

    class Own(_Call):
        relations = (Parity(),)

    assert [c.case for c in checks_for(Own)] == ["own"]


def test_something_else_in_relations_is_refused():
    with pytest.raises(DeclarationError, match=r"Odd.relations\[0\] is 3, not a declaration"):
        class Odd(_Call):
            relations = (3,)
