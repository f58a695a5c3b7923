"""A mutant whose changed expression gives, at every evaluation, what the original's gives
reuses the original's comparison against itself (limitcase.mutate.infection): the
equivalence records must be exactly those of comparing the mutant itself, for every mutant,
reused or not; and a value that merely looks equal (another sign of zero, an alias, a view,
another dtype) must count as changed."""

from __future__ import annotations

import ast
import sys

import numpy as np
import pytest

from limitcase.loader import load_products
from limitcase.mutate import dead, equivalence, make_mutants, probe_difference
from limitcase.mutate.infection import ProbedClass, _probe_safe, probed_class, same_value

PRODUCTS = ("DownAndOutPut", "GapCall", "DoubleKnockOutPut", "FloatingLookbackCall", "Autocallable")


def _temporary_refs() -> int:
    """References a temporary passed straight to same_value has in the predicate (measured:
    the interpreter's counting is not assumed); an array held by a name has one more."""
    seen: list[int] = []
    same_value(np.zeros(1), np.zeros(1), lambda a: seen.append(sys.getrefcount(a)) or True)
    return max(seen)


_LIMIT = _temporary_refs()


def _fresh(a) -> bool:
    return a.base is None and sys.getrefcount(a) <= _LIMIT


@pytest.mark.parametrize("name", PRODUCTS)
def test_reused_comparisons_are_the_mutants_own_bit_for_bit(name, monkeypatch):
    (cls,) = [c for c in load_products(()) if c.__name__ == name]
    mutants, _ = make_mutants(cls)
    unchanged = {"yes": 0}
    real = ProbedClass.unchanged

    def counting(self, key, changed):
        out = real(self, key, changed)
        unchanged["yes"] += out
        return out

    monkeypatch.setattr(ProbedClass, "unchanged", counting)
    dead._RESULTS.clear()
    dead._CHANGED.clear()
    for m in mutants:
        site = (m.file, m.mutation.line, m.mutation.col)
        variant = (m.mutation.function, m.mutation.source)
        fast = equivalence(m.cls, m.original, paths=2048, site=site, variant=variant)
        slow = equivalence(m.cls, m.original, paths=2048, site=None)
        assert fast.to_dict() == slow.to_dict(), f"{m.id}: {m.mutation.description}"
        if fast.equivalent:
            a = probe_difference(m.cls, m.original, paths=2048, site=site, variant=variant)
            b = probe_difference(m.cls, m.original, paths=2048, site=None)
            assert a == b, m.id
    assert unchanged["yes"] > 0, "no comparison was reused: the probes saw nothing"
    # every probed run gave exactly the plain twin's result (no probe disturbed a run)
    assert all(v is not None for v in dead._CHANGED.values())


def test_every_catalogue_product_gets_a_probed_twin_that_prices_as_the_original():
    from limitcase.engine import evaluate

    for cls in load_products(()):
        probed = probed_class(cls)
        assert probed is not None, cls.__name__
        p = cls()
        if p.early_exercise:
            continue
        a = evaluate([p], p.scenario(), paths=512, seed=3)
        b = evaluate([probed.cls(**p.params())], p.scenario(), paths=512, seed=3)
        assert repr(a.mean.tolist()) == repr(b.mean.tolist()), cls.__name__


def test_equal_looking_values_that_can_be_told_apart_count_as_changed():
    held = np.array([1.0, 2.0])
    # (what, same?, the two values made inside the call: pytest's assertion rewriting would
    # keep references to values made inside an assert)
    cases = [
        ("equal floats", True, lambda: same_value(1.5, 1.5, _fresh)),
        ("zeros of two signs: 1 / x tells them apart", False, lambda: same_value(0.0, -0.0, _fresh)),
        ("two NaNs", True, lambda: same_value(float("nan"), float("nan"), _fresh)),
        ("int and float", False, lambda: same_value(1, 1.0, _fresh)),
        ("numpy and Python float", False, lambda: same_value(np.float64(1.0), 1.0, _fresh)),
        ("numpy scalars", True, lambda: same_value(np.float64(2.0), np.float64(2.0), _fresh)),
        ("float32 and float64", False, lambda: same_value(np.float32(2.0), np.float64(2.0), _fresh)),
        ("fresh equal arrays", True, lambda: same_value(np.array([1.0, 2.0]), np.array([1.0, 2.0]), _fresh)),
        ("arrays with zeros of two signs", False,
         lambda: same_value(np.array([0.0, 2.0]), np.array([-0.0, 2.0]), _fresh)),
        ("another dtype", False, lambda: same_value(np.array([1.0, 2.0]), np.array([1, 2]), _fresh)),
        ("an alias: a later write parts them", False, lambda: same_value(np.array([1.0, 2.0]), held, _fresh)),
        ("a view", False, lambda: same_value(np.array([1.0, 2.0]), np.array([[1.0, 2.0, 3.0]])[0, :2], _fresh)),
        ("another layout", False, lambda: same_value(np.ones((2, 2)), np.asfortranarray(np.ones((2, 2))), _fresh)),
        ("the very same object", True, lambda: same_value(held, held, _fresh)),
        ("lists (changed in place)", False, lambda: same_value([1.0], [1.0], _fresh)),
        ("tuples of scalars", True, lambda: same_value((1, 2.0), (1, 2.0), _fresh)),
        ("tuples of arrays", False, lambda: same_value((np.zeros(1),), (np.zeros(1),), _fresh)),
    ]
    wrong = [what for what, expected, run in cases if run() is not expected]
    assert not wrong


def test_the_probe_hands_on_the_original_and_marks_what_differs():
    probed = ProbedClass.__new__(ProbedClass)
    probed.changed = set()
    held = np.array([3.0, 4.0])
    v = probed._probe(lambda: held * 1.0, ((0, lambda: held + 0.0), (1, lambda: held), (2, lambda: held[::1]),
                                          (3, lambda: 1 / 0), (4, lambda: held * 2.0)))
    same = bool(np.array_equal(v, held))
    changed = set(probed.changed)
    assert same
    assert changed == {1, 2, 3, 4}  # an alias, a view, a raise, another value; 0 is the same


@pytest.mark.parametrize("text, safe", [
    ("np.maximum(s - k, 0.0)", True),
    ("np.exp(-r * t) * x.sum(axis=1)", True),
    ("self.alive(obs) * 2", False),  # a method of the product: it may do anything
    ("np.add(a, b, out=a)", False),  # writes to its argument
    ("(y := x + 1)", False),
    ("super().payoff(obs)", False),
    ("np.random.default_rng(1).random()", False),
    ("math.exp(x) if c else 0.0", True),
])
def test_only_side_effect_free_expressions_are_probed(text, safe):
    node = ast.parse(text, mode="eval").body
    assert _probe_safe(node) is safe
