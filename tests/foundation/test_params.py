"""Param and Product construction: ranges, errors that name what and where, replace, repr."""

import math

import pytest

from limitcase import Param, ParamError, Product
from limitcase.params import Parametrised


class Thing(Parametrised):
    vol = Param(0.2, low=0.0, low_open=True, high=5.0, doc="volatility")
    count = Param(3, low=1, high=10, integer=True, doc="number of dates")
    barrier = Param(120.0, low=0.0, high=math.inf, doc="a price level")


def test_defaults_and_overrides():
    t = Thing(vol=0.3)
    assert t.vol == 0.3 and t.count == 3 and t.barrier == 120.0
    assert isinstance(t.count, int)


def test_replace_validates_and_copies():
    t = Thing()
    u = t.replace(barrier=math.inf)
    assert u.barrier == math.inf and t.barrier == 120.0
    with pytest.raises(ParamError, match=r"vol=-0.1 is outside \(0, 5\] for Thing"):
        t.replace(vol=-0.1)


@pytest.mark.parametrize(
    "kwargs, pattern",
    [
        ({"vol": 0.0}, r"vol=0.0 is outside \(0, 5\] for Thing \(volatility\)"),
        ({"vol": 6}, r"vol=6 is outside"),
        ({"count": 2.5}, r"count=2.5 is not a whole number for Thing"),
        ({"count": 0}, r"count=0 is outside \[1, 10\] integer"),
        ({"vol": "high"}, r"vol='high' is not a number for Thing"),
        ({"vol": True}, r"vol=True is not a number"),
        ({"vol": float("nan")}, r"vol=nan is outside"),
        ({"colour": 1}, r"Thing has no parameter 'colour'; its parameters are: vol, count, barrier"),
        ({"barrier": -1.0}, r"barrier=-1.0 is outside \[0, inf\]"),
    ],
)
def test_bad_values_name_parameter_value_and_range(kwargs, pattern):
    with pytest.raises(ParamError, match=pattern):
        Thing(**kwargs)


def test_param_error_is_a_value_error():
    with pytest.raises(ValueError):
        Thing(vol=-1)


def test_integer_accepts_integral_floats():
    assert Thing(count=4.0).count == 4


def test_read_only_attributes():
    t = Thing()
    with pytest.raises(AttributeError, match="read-only"):
        t.vol = 0.5


def test_repr_and_equality():
    t = Thing(barrier=math.inf)
    assert repr(t) == "Thing(vol=0.2, count=3, barrier=inf)"
    assert t == Thing(barrier=math.inf) and t != Thing()
    assert hash(t) == hash(Thing(barrier=math.inf))


def test_subclass_inherits_and_redeclares():
    class Other(Thing):
        vol = Param(0.5, low=0.0, high=1.0)
        extra = Param(1.0)

    o = Other()
    assert o.vol == 0.5 and o.count == 3 and o.extra == 1.0
    assert list(Other.param_specs()) == ["vol", "count", "barrier", "extra"]


def test_range_text():
    assert Thing.param_specs()["vol"].range_text() == "(0, 5]"
    assert Thing.param_specs()["barrier"].range_text() == "[0, inf]"
    assert Thing.param_specs()["count"].range_text() == "[1, 10] integer"


def test_product_label_shows_changed_params():
    from limitcase_payoffs.vanilla import EuropeanCall

    assert EuropeanCall().label() == "EuropeanCall"
    assert EuropeanCall(strike=0.0).label() == "EuropeanCall(strike=0)"


def test_product_dates_are_validated():
    class Backwards(Product):
        def dates(self):
            return [1.0, 0.5]

        def payoff(self, obs):
            return obs.s[:, -1]

    with pytest.raises(ParamError, match="strictly increasing"):
        Backwards().validated_dates()
