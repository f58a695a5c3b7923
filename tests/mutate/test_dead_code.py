"""A mutant in a statement the original never runs on a comparison's paths, or in an
expression of a statement that runs but is never evaluated (the arm of a conditional
expression not taken), reuses the original's comparison against itself
(limitcase.mutate.dead): the equivalence records must be exactly those of comparing the
mutant itself, for every mutant, reused or not."""

from __future__ import annotations

import sys

import pytest

from limitcase.loader import load_products
from limitcase.mutate import equivalence, make_mutants, probe_difference
from limitcase.mutate import dead

PRODUCTS = ("DownAndOutPut", "DownAndInCall", "BermudanPut", "GapCall", "SpreadCall")


@pytest.mark.parametrize("name", PRODUCTS)
def test_reused_comparisons_are_the_mutants_own_bit_for_bit(name, monkeypatch):
    (cls,) = [c for c in load_products(()) if c.__name__ == name]
    mutants, _ = make_mutants(cls)
    calls = {"compared": 0}
    real = dead.reuse_or_compare

    def counting(compare, *args):
        def counted(*a):
            calls["compared"] += 1
            return compare(*a)
        return real(counted, *args)

    monkeypatch.setattr(sys.modules["limitcase.mutate.equivalence"], "reuse_or_compare", counting)
    dead._RESULTS.clear()
    reused_somewhere = 0
    for m in mutants:
        site = (m.file, m.mutation.line, m.mutation.col)
        before = calls["compared"]
        fast = equivalence(m.cls, m.original, paths=2048, site=site)
        spent = calls["compared"] - before
        slow = equivalence(m.cls, m.original, paths=2048, site=None)
        assert fast.to_dict() == slow.to_dict(), f"{m.id}: {m.mutation.description}"
        if fast.equivalent:
            a = probe_difference(m.cls, m.original, paths=2048, site=site)
            b = probe_difference(m.cls, m.original, paths=2048, site=None)
            assert a == b, m.id
        reused_somewhere += spent < len(fast.points)
    if name == "DownAndOutPut":  # the up-barrier branch and the rebate-at-hit branch are never run
        assert reused_somewhere >= 5
    if name == "DownAndInCall":  # the put arm of `max(s - K, 0) if self.call else max(K - s, 0)`
        assert reused_somewhere >= 3


def test_the_span_of_a_mutation_is_the_widest_expression_starting_there(tmp_path):
    src = tmp_path / "m.py"
    src.write_text("def f(x, c):\n    return (x + 1) if c else (x * 2)\n")
    src.write_text("def f(x, c):\n    return (x + 1) if c else (x * 2)\n\n\ndef g(x):\n    return x in (1, 2)\n")
    assert dead.mutated_span(str(src), 2, 30) == (2, 2, 30, 35)  # x * 2
    assert dead.mutated_span(str(src), 2, 12) == (2, 2, 12, 17)  # x + 1
    assert dead.mutated_span(str(src), 2, 11) == (2, 2, 11, 36)  # the conditional expression
    assert dead.mutated_span(str(src), 2, 4) is None  # a statement, not an expression
    ns: dict = {}
    exec(compile(src.read_text(), str(src), "exec"), ns)
    _, lines, spans = dead.traced_spans(str(src), lambda: (ns["f"](3, True), ns["g"](1)))
    assert 2 in lines
    assert not dead._evaluated(spans, (2, 2, 30, 35))  # the arm not taken never ran
    assert dead._evaluated(spans, (2, 2, 12, 17))  # x + 1 did
    assert dead._evaluated(spans, (2, 2, 11, 36))
    two = dead.mutated_span(str(src), 6, 20)
    assert two == (6, 6, 20, 21)  # the 2 of (1, 2): folded into one constant, evaluated with it
    assert dead._evaluated(spans, two)


def test_a_statement_that_defines_is_never_judged_dead(tmp_path):
    src = tmp_path / "m.py"
    src.write_text("def f(x, k=2):\n    if x > 0:\n        return (x +\n                k)\n    return 0\n")
    assert dead.mutated_lines(str(src), 1) is None  # the default k=2 is evaluated at import
    assert list(dead.mutated_lines(str(src), 2)) == [2]  # the header of the if, not its body
    assert list(dead.mutated_lines(str(src), 4)) == [3, 4]  # the whole return statement


def test_two_models_with_the_same_repr_do_not_share_a_comparison(tmp_path):
    """A correlation matrix is shown as 'matrix' in a model's repr: the reuse is keyed by the
    model's whole state, so a comparison under one matrix is never served for another."""
    import numpy as np

    from limitcase.models import MultiBlackScholes

    a = MultiBlackScholes(spots=(100.0, 95.0, 105.0), vols=0.2,
                          correlation=np.array([[1, 0.5, 0.2], [0.5, 1, 0.3], [0.2, 0.3, 1.0]]))
    b = MultiBlackScholes(spots=(100.0, 95.0, 105.0), vols=0.2,
                          correlation=np.array([[1, 0.4, 0.2], [0.5 - 0.1, 1, 0.3], [0.2, 0.3, 1.0]]))
    assert repr(a) == repr(b)
    src = tmp_path / "m.py"
    src.write_text("x = 1\ny = 2\n")
    (cls,) = [c for c in load_products(()) if c.__name__ == "BasketCall"]
    seen = []

    def compare(original, mutant, model, paths, seed, key):
        seen.append(model)
        return len(seen)

    p = cls()
    dead._RESULTS.clear()
    first = dead.reuse_or_compare(compare, p, p, a, 100, 1, 7, (str(src), 2))
    again = dead.reuse_or_compare(compare, p, p, a, 100, 1, 7, (str(src), 2))
    other = dead.reuse_or_compare(compare, p, p, b, 100, 1, 7, (str(src), 2))
    assert first == again == 1 and other == 2 and seen == [a, b]
