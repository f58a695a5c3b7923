"""Each mutation operator on small source snippets: it makes the intended change, the
mutated function unparses and parses back to itself and compiles, and the reported line
and diff point at the changed code."""

from __future__ import annotations

import ast
import textwrap

import pytest

from limitcase.errors import InputError
from limitcase.mutate import OPERATORS, Context, function_mutations

CTX = Context(params=frozenset({"strike", "barrier", "rebate", "maturity", "fixings"}), strike_params=("strike",))


def mutate(src: str, operator: str | None = None, ctx: Context = CTX):
    text = textwrap.dedent(src).lstrip("\n")
    fn = ast.parse(text).body[0]
    ms = function_mutations(fn, text, ctx, [operator] if operator else None, filename="snippet.py")
    return text, ms


def bodies(ms) -> list[str]:
    """The mutated function bodies as one line each (the def line dropped)."""
    return [" | ".join(line.strip() for line in m.source.splitlines()[1:]) for m in ms]


def test_compare_strict():
    _, ms = mutate("""
        def payoff(self, obs):
            return np.where(obs.s[:, -1] > self.strike, 1.0, 0.0)
    """, "compare_strict")
    assert bodies(ms) == ["return np.where(obs.s[:, -1] >= self.strike, 1.0, 0.0)"]
    assert ms[0].line == 2 and ms[0].params_involved == ("strike",)


def test_compare_side_each_comparison_of_a_chain():
    _, ms = mutate("""
        def payoff(self, obs):
            return (self.strike < obs.s[:, -1]) & (obs.s[:, -1] <= self.barrier)
    """, "compare_side")
    assert bodies(ms) == [
        "return (self.strike > obs.s[:, -1]) & (obs.s[:, -1] <= self.barrier)",
        "return (self.strike < obs.s[:, -1]) & (obs.s[:, -1] >= self.barrier)",
    ]


def test_max_min_functions_methods_and_builtins():
    _, ms = mutate("""
        def payoff(self, obs):
            top = obs.s.max(axis=1)
            return np.maximum(top - self.strike, 0.0) + max(1.0, 2.0)
    """, "max_min")
    assert bodies(ms) == [
        "top = obs.s.min(axis=1) | return np.maximum(top - self.strike, 0.0) + max(1.0, 2.0)",
        "top = obs.s.max(axis=1) | return np.minimum(top - self.strike, 0.0) + max(1.0, 2.0)",
        "top = obs.s.max(axis=1) | return np.maximum(top - self.strike, 0.0) + min(1.0, 2.0)",
    ]


def test_index_shift_dates_assets_and_slices():
    _, ms = mutate("""
        def payoff(self, obs):
            return obs.s[:, -1] - obs.s[:, 0] + obs.s[:, 1:].sum(axis=1)
    """, "index_shift")
    assert bodies(ms) == [
        "return obs.s[:, -2] - obs.s[:, 0] + obs.s[:, 1:].sum(axis=1)",
        "return obs.s[:, -1] - obs.s[:, 1] + obs.s[:, 1:].sum(axis=1)",
        "return obs.s[:, -1] - obs.s[:, 0] + obs.s[:, 2:].sum(axis=1)",
        "return obs.s[:, -1] - obs.s[:, 0] + obs.s[:, 0:].sum(axis=1)",
    ]


def test_index_shift_of_a_loop_index():
    _, ms = mutate("""
        def payoff(self, obs):
            return obs.s[:, j]
    """, "index_shift")
    assert bodies(ms) == ["return obs.s[:, j - 1]", "return obs.s[:, j + 1]"]


def test_discount_dropped_or_squared_only_where_negative():
    _, ms = mutate("""
        def payoff(self, obs):
            g = np.exp(np.log(obs.s).mean(axis=1))
            return g * np.exp(-obs.rate * (obs.t[-1] - obs.t[0]))
    """, "discount")
    assert bodies(ms) == [
        "g = np.exp(np.log(obs.s).mean(axis=1)) | return g * 1.0",
        "g = np.exp(np.log(obs.s).mean(axis=1)) | return g * np.exp(-obs.rate * (obs.t[-1] - obs.t[0])) ** 2",
    ]
    assert ms[0].line == 3


def test_sign_flips_but_not_indices():
    _, ms = mutate("""
        def payoff(self, obs):
            x = -obs.s[:, -1]
            x += self.strike
            return x + 1.0
    """, "sign")
    assert bodies(ms) == [
        "x = obs.s[:, -1] | x += self.strike | return x + 1.0",
        "x = -obs.s[:, -1] | x -= self.strike | return x + 1.0",
        "x = -obs.s[:, -1] | x += self.strike | return x - 1.0",
    ]


def test_axis_single_and_multi_asset():
    src = """
        def payoff(self, obs):
            return obs.s.mean(axis=1)
    """
    _, ms = mutate(src, "axis")
    assert bodies(ms) == ["return obs.s.mean(axis=0)"]
    _, ms = mutate(src, "axis", Context(multi_asset=True))
    assert bodies(ms) == ["return obs.s.mean(axis=0)", "return obs.s.mean(axis=2)"]


def test_call_put_swaps_a_difference():
    _, ms = mutate("""
        def payoff(self, obs):
            return np.maximum(obs.s[:, -1] - self.strike, 0.0)
    """, "call_put")
    assert bodies(ms) == ["return np.maximum(self.strike - obs.s[:, -1], 0.0)"]
    assert ms[0].description == "`obs.s[:, -1] - self.strike` -> `self.strike - obs.s[:, -1]`"


def test_at_maturity_numpy_and_method_forms_only_over_dates():
    _, ms = mutate("""
        def payoff(self, obs):
            alive = np.all(obs.s < self.barrier, axis=1)
            hit = (obs.s > self.barrier).any(axis=1)
            every = np.all(obs.s > 0.0)
            return alive * hit * every
    """, "at_maturity")
    assert [b.split(" | ")[:2] for b in bodies(ms)] == [
        ["alive = (obs.s < self.barrier)[:, -1]", "hit = (obs.s > self.barrier).any(axis=1)"],
        ["alive = np.all(obs.s < self.barrier, axis=1)", "hit = (obs.s > self.barrier)[:, -1]"],
    ]
    assert [m.line for m in ms] == [2, 3]


def test_rebate_term_set_to_zero():
    _, ms = mutate("""
        def payoff(self, obs):
            return np.where(alive, vanilla, self.rebate)
    """, "rebate")
    assert bodies(ms) == ["return np.where(alive, vanilla, 0.0)"]


def test_strike_spot_both_ways():
    _, ms = mutate("""
        def payoff(self, obs):
            return np.maximum(obs.s[:, -1] - self.strike, 0.0) / obs.s0
    """, "strike_spot")
    assert bodies(ms) == [
        "return np.maximum(obs.s[:, -1] - obs.s0, 0.0) / obs.s0",
        "return np.maximum(obs.s[:, -1] - self.strike, 0.0) / self.strike",
    ]


def test_fixing_left_out_of_a_read_of_every_date():
    _, ms = mutate("""
        def payoff(self, obs):
            return obs.s.mean(axis=1) - obs.s[:, -1] + obs.s.shape[1]
    """, "fixing")
    assert bodies(ms) == [
        "return obs.s[:, 1:].mean(axis=1) - obs.s[:, -1] + obs.s.shape[1]",
        "return obs.s[:, :-1].mean(axis=1) - obs.s[:, -1] + obs.s.shape[1]",
    ]


def test_messages_docstrings_and_nested_definitions_are_not_mutated():
    _, ms = mutate('''
        def payoff(self, obs):
            """A docstring - with a dash."""
            if obs.paths < 1:
                raise ValueError(f"{obs.paths - 1} paths")
            f = lambda x: x - 1
            return obs.s[:, -1]
    ''')
    assert {m.line for m in ms} == {3, 6}  # the test itself and the final index, nothing else


SNIPPET = """
    def payoff(self, obs):
        alive = np.all(obs.s < self.barrier, axis=1)
        vanilla = np.maximum(obs.s[:, -1] - self.strike, 0.0)
        paid = np.where(alive, vanilla, self.rebate) * np.exp(-obs.rate * obs.t[-1])
        return paid - obs.s.mean(axis=1) * 0.0 + obs.s0 * 0.0
"""


def test_every_operator_fires_on_the_snippet_and_round_trips():
    text, ms = mutate(SNIPPET)
    assert {m.operator for m in ms} == set(OPERATORS)
    lines = text.splitlines()
    sources = [m.source for m in ms]
    assert len(sources) == len(set(sources))  # de-duplicated
    original = ast.unparse(ast.parse(text).body[0])
    for m in ms:
        assert m.source != original
        assert ast.unparse(ast.parse(m.source)) == m.source  # unparse round-trips
        compile(m.source, "<mutant>", "exec")
        # the diff removes the original line the node is on and adds one line in its place
        removed = [x[1:] for x in m.diff.splitlines() if x.startswith("-") and not x.startswith("---")]
        added = [x[1:] for x in m.diff.splitlines() if x.startswith("+") and not x.startswith("+++")]
        assert removed == [lines[m.line - 1]], m
        assert len(added) == 1 and added[0] != removed[0]
        # the hunk header carries the snippet's own line numbers, one line of context
        header = next(x for x in m.diff.splitlines() if x.startswith("@@"))
        start, count = (int(v) for v in header.split()[1][1:].split(","))
        assert start == m.line - 1 and count == min(m.line + 1, len(lines)) - start + 1


def test_unknown_operator_is_bad_input():
    with pytest.raises(InputError, match="not a mutation operator"):
        mutate(SNIPPET, "no_such_operator")
