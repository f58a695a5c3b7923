"""Mutation testing of product code: how many payoff bugs do a product's checks catch?

A *mutant* is a copy of a product class with one small change in its payoff code, the
kind of slip a product author makes: ``<`` for ``<=``, ``np.maximum`` for ``np.minimum``,
the second-to-last fixing for the last, a discount factor dropped, a call written as a put.
Each mutant is checked with the product's own declared reductions and relations
(:func:`limitcase.reduce.checks_for` on the mutant class, :func:`limitcase.suite.run_checks`);
a mutant the checks fail (or that errors: a crash is a visible failure) is *caught*, one that
passes every check is a *survivor*. The mutation score is::

    score = (caught + error) / (caught + error + survived)

Equivalent mutants, which change no cash flow, are excluded from the score and listed apart.

Scope: what is mutated
----------------------
The methods that produce cash flows and their timing, ``payoff``, ``exercise_value``,
``dates`` and ``exercise_dates``, as the product class resolves them (inherited ones
included), and every helper they reach that is defined in the product's own module:
module-level functions they call or name, and methods, properties, static and class
methods they reach through ``self.`` (transitively). Out of scope: code of other modules
(``limitcase`` itself, ``_common.even_dates``), the declarations (``reductions``,
``relations``, ``reference``, ``scenario``), ``regression_state`` (it only steers the
Longstaff-Schwartz policy), ``_check`` (validation), nested functions with closures, and
code under ``raise``/``assert`` and inside f-strings (messages, not cash flows).

How a mutant is built
---------------------
The module's source is parsed (:mod:`ast`); one node of one in-scope function is replaced;
the function is unparsed (:func:`ast.unparse`) and compiled in a *copy* of its module's
namespace, so its imports and module globals resolve. Every in-scope function is rebound
to that copy, so a mutated module helper is seen by the methods that call it; the product
class is then subclassed with the rebound methods. The subclass keeps the original's name,
parameters, reductions and relations, so exactly the same checks apply, on the same random
streams (case keys are made from the product's name). Only the mutant class sees the
change: the other legs of its checks (the vanilla of in + out = vanilla) are the originals.
A mutant that does not compile is discarded and not counted.

Equivalent mutants
------------------
A mutant is declared equivalent only if it pays exactly what the original pays (to the
engine's path-rule tolerance, rtol = atol = 1e-9) on every path tried at every parameter
point the checks use (each leg of each check that is the product itself, with that check's
model; the defaults and every reduction's limit among them): deterministic *edge paths*
built from the product's parameters (flat at each level, ending exactly on it, touching it
on one date, touching one level and ending on another) and random paths of the point's
model through :func:`limitcase.engine.evaluate` with a :class:`~limitcase.engine.PathRule`
comparing the two on every path. Dates and exercise dates must agree too. Otherwise the
mutant is real, even if it differs only on an edge path (a path sitting exactly on the
barrier): such survivors are flagged ``edge_only``.

Equivalent at the check points only
-----------------------------------
An equivalent mutant is also compared at one point no check uses (every real parameter up
10%, every count up one: :func:`probe_point`). If it pays differently there, it is still
equivalent by the definition above (no check can see it) and still not scored, but it is
flagged with advice: the checks sit only where that code is invisible (every check with
the strike at the spot, say).

Budget and verdicts
-------------------
Mutants run in parallel (a fork-based process pool). The equivalence test runs first (it
is cheap, and spares dead-code mutants the checks), then the checks with a small path
budget (``quick_paths``); only the survivors run again with the full budget (``paths``)
before being declared survivors. Checks are sampled as ``limitcase check`` samples them
(``method="auto"`` by default), and a mutant is judged as ``limitcase check`` judges one
product: Holm over that product's checks. Mutant and original share every random stream,
so a mutant is caught by its effect, not by the luck of the draw. The original products'
checks run at both budgets: a case the original fails at its own level cannot catch its
mutants (it is set aside), and a case that fails under Holm over the whole run, as
``limitcase check`` would report it on the same products, is a false alarm.

Limits
------
A mutant that loops for ever or exhausts memory is not stopped (there is no per-mutant
timeout); checks of *other* products that use this one as a leg are not run on its
mutants (only its own declared checks count, a conservative score); ``run_mutation`` is
not re-entrant (the worker registry is module state).
"""

from __future__ import annotations

import ast
import collections
import concurrent.futures
import copy
import difflib
import inspect
import itertools
import json
import math
import multiprocessing
import os
import sys
import textwrap
import time
import types
import warnings
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any, Callable, Iterable, Iterator, Sequence

import numpy as np
from scipy.stats import norm

from .engine import BLOCK, PathRule, case_key, evaluate
from .errors import InputError, LimitcaseError, ParamError
from .models.base import Model
from .product import Cashflows, Observed, Product
from .reduce import Check, checks_for
from .suite import DEFAULT_ALPHA, DEFAULT_PATHS, DEFAULT_SEED, run_checks
from .verdict import POWER, Outcome, finalise

__all__ = [
    "OPERATORS",
    "Operator",
    "Context",
    "Mutation",
    "Mutant",
    "MutantResult",
    "PointDifference",
    "Equivalence",
    "ProductScore",
    "MutationReport",
    "QUICK_PATHS",
    "EQUIVALENCE_PATHS",
    "payoff_scope",
    "function_mutations",
    "make_mutants",
    "equivalence",
    "check_points",
    "probe_point",
    "suggest",
    "run_mutation",
    "product_scores",
    "scores_from_json",
    "mutation_scores",
    "score_of",
]

QUICK_PATHS = 10_000
"""Paths per check in the first pass; survivors run again with the full budget."""

EQUIVALENCE_PATHS = 4 * BLOCK
"""Random paths per parameter point on which a mutant is compared with the original."""

EQUIVALENCE_REGRESSION_PATHS = 2 * BLOCK
"""Pilot paths of the Longstaff-Schwartz fits in the equivalence runs (mutant and original
are fitted on the same pilot, so identical exercise values give identical policies)."""

ROOTS = ("payoff", "exercise_value", "dates", "exercise_dates")
"""The methods whose code (and the helpers they reach) is mutated."""

NOT_HELPERS = frozenset({
    "reference", "reference_source", "scenario", "control_variates", "formula", "label", "params",
    "replace", "param_specs", "_check", "regression_state", "validated_dates", "early_exercise",
})
"""Attributes never followed as helpers: declarations, validation, the regression state."""

TOLERANCE = PathRule((1.0, -1.0))
"""The engine's path-by-path tolerance, used for every equivalence comparison."""

FORMAT_VERSION = 1


# ----------------------------------------------------------------------------------------
# operators


@dataclass(frozen=True)
class Context:
    """What an operator may know about the function it mutates.

    Attributes
    ----------
    self_name
        Name of the instance argument (``self``), or ``None`` for a module function.
    obs_names
        Names bound to the :class:`~limitcase.product.Observed` of the payoff.
    params
        The product's parameter names.
    strike_params
        Parameters that are strikes (their name contains ``strike``), for the
        strike/spot swap.
    multi_asset
        Whether ``obs.s`` has an asset axis (three dimensions instead of two).
    """

    self_name: str | None = "self"
    obs_names: frozenset[str] = frozenset({"obs"})
    params: frozenset[str] = frozenset()
    strike_params: tuple[str, ...] = ()
    multi_asset: bool = False


@dataclass(frozen=True)
class Operator:
    """A mutation operator: ``apply(node, parent, ctx)`` returns the replacements of
    ``node`` it proposes, each as ``(new_node, short description)``."""

    name: str
    summary: str
    apply: Callable[[ast.AST, ast.AST | None, Context], list[tuple[ast.AST, str]]]


def _int_of(node: ast.AST) -> int | None:
    """The integer a node spells (``3``, ``-1``), or ``None``."""
    if isinstance(node, ast.Constant) and type(node.value) is int:
        return node.value
    if (isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.USub)
            and isinstance(node.operand, ast.Constant) and type(node.operand.value) is int):
        return -node.operand.value
    return None


def _int_node(k: int) -> ast.expr:
    return ast.Constant(k) if k >= 0 else ast.UnaryOp(ast.USub(), ast.Constant(-k))


def _is_self_attr(node: ast.AST, ctx: Context, names: Iterable[str] | None = None) -> bool:
    return (isinstance(node, ast.Attribute) and isinstance(node.value, ast.Name) and ctx.self_name is not None
            and node.value.id == ctx.self_name and (names is None or node.attr in names))


def _is_obs_attr(node: ast.AST, ctx: Context, attr: str) -> bool:
    return (isinstance(node, ast.Attribute) and node.attr == attr and isinstance(node.value, ast.Name)
            and node.value.id in ctx.obs_names)


def _has_text(node: ast.AST) -> bool:
    return isinstance(node, ast.JoinedStr) or (isinstance(node, ast.Constant) and isinstance(node.value, (str, bytes)))


_CMP_TEXT = {ast.Lt: "<", ast.LtE: "<=", ast.Gt: ">", ast.GtE: ">=", ast.Eq: "==", ast.NotEq: "!="}
_STRICT = {ast.Lt: ast.LtE, ast.LtE: ast.Lt, ast.Gt: ast.GtE, ast.GtE: ast.Gt}
_SIDE = {ast.Lt: ast.Gt, ast.LtE: ast.GtE, ast.Gt: ast.Lt, ast.GtE: ast.LtE, ast.Eq: ast.NotEq, ast.NotEq: ast.Eq}


def _compare_with(table: dict) -> Callable[[ast.AST, ast.AST | None, Context], list[tuple[ast.AST, str]]]:
    def apply(node: ast.AST, parent: ast.AST | None, ctx: Context) -> list[tuple[ast.AST, str]]:
        if not isinstance(node, ast.Compare):
            return []
        out = []
        for i, op in enumerate(node.ops):
            new_op = table.get(type(op))
            if new_op is None:
                continue
            new = copy.deepcopy(node)
            new.ops[i] = new_op()
            out.append((new, f"`{_CMP_TEXT[type(op)]}` -> `{_CMP_TEXT[new_op]}`"))
        return out

    return apply


_MAX_MIN = {
    "maximum": "minimum", "minimum": "maximum", "max": "min", "min": "max", "amax": "amin", "amin": "amax",
    "fmax": "fmin", "fmin": "fmax", "nanmax": "nanmin", "nanmin": "nanmax", "argmax": "argmin", "argmin": "argmax",
}


def _max_min(node: ast.AST, parent: ast.AST | None, ctx: Context) -> list[tuple[ast.AST, str]]:
    if isinstance(node, ast.Attribute) and node.attr in _MAX_MIN and not _is_self_attr(node, ctx):
        new = copy.deepcopy(node)
        new.attr = _MAX_MIN[node.attr]
        return [(new, f"`.{node.attr}` -> `.{new.attr}`")]
    if (isinstance(node, ast.Name) and node.id in ("max", "min") and isinstance(parent, ast.Call)
            and parent.func is node):
        new = ast.Name(_MAX_MIN[node.id], ast.Load())
        return [(new, f"`{node.id}` -> `{new.id}`")]
    return []


def _shifted(k: int) -> list[int]:
    """Off-by-one neighbours of an index that stay on the same side (no wrap-around)."""
    if k >= 0:
        return [k + 1] + ([k - 1] if k > 0 else [])
    return [k - 1] + ([k + 1] if k < -1 else [])


def _index_shift(node: ast.AST, parent: ast.AST | None, ctx: Context) -> list[tuple[ast.AST, str]]:
    if not isinstance(node, ast.Subscript):
        return []
    elts = list(node.slice.elts) if isinstance(node.slice, ast.Tuple) else [node.slice]
    out = []

    def rebuilt(i: int, new_elt: ast.expr) -> ast.Subscript:
        new = copy.deepcopy(node)
        if isinstance(new.slice, ast.Tuple):
            new.slice.elts[i] = new_elt
        else:
            new.slice = new_elt
        return new

    for i, e in enumerate(elts):
        k = _int_of(e)
        if k is not None:
            for j in _shifted(k):
                out.append((rebuilt(i, _int_node(j)), f"index `{k}` -> `{j}`"))
        elif isinstance(e, ast.Name):
            for op, sign in ((ast.Sub(), "-"), (ast.Add(), "+")):
                out.append((rebuilt(i, ast.BinOp(ast.Name(e.id, ast.Load()), op, ast.Constant(1))),
                            f"index `{e.id}` -> `{e.id} {sign} 1`"))
        elif isinstance(e, ast.Slice):
            for bound in ("lower", "upper"):
                b = getattr(e, bound)
                k = _int_of(b) if b is not None else None
                if k is None:
                    continue
                for j in _shifted(k):
                    s = copy.deepcopy(e)
                    setattr(s, bound, _int_node(j))
                    out.append((rebuilt(i, s), f"slice {bound} bound `{k}` -> `{j}`"))
    return out


def _negative(node: ast.AST) -> bool:
    """Whether an expression is written as a negative quantity (``-r * t``, ``-(r * t)``)."""
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.USub):
        return True
    if isinstance(node, ast.Constant) and isinstance(node.value, (int, float)) and node.value < 0:
        return True
    if isinstance(node, ast.BinOp) and isinstance(node.op, (ast.Mult, ast.Div)):
        return _negative(node.left) or _negative(node.right)
    return False


def _is_exp_call(node: ast.AST) -> bool:
    if not isinstance(node, ast.Call) or len(node.args) != 1 or node.keywords:
        return False
    f = node.func
    return (isinstance(f, ast.Name) and f.id == "exp") or (isinstance(f, ast.Attribute) and f.attr == "exp")


def _discount(node: ast.AST, parent: ast.AST | None, ctx: Context) -> list[tuple[ast.AST, str]]:
    if not (_is_exp_call(node) and _negative(node.args[0])):
        return []
    text = ast.unparse(node)
    squared = ast.BinOp(copy.deepcopy(node), ast.Pow(), ast.Constant(2))
    return [(ast.Constant(1.0), f"discount `{text}` dropped"), (squared, f"discount `{text}` squared")]


def _sign(node: ast.AST, parent: ast.AST | None, ctx: Context) -> list[tuple[ast.AST, str]]:
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.USub):
        if isinstance(node.operand, ast.Constant):
            # -1 as an index is the index-shift operator's; as an axis, the axis operator's
            if isinstance(parent, (ast.Subscript, ast.Tuple, ast.Slice, ast.keyword)):
                return []
        return [(copy.deepcopy(node.operand), "unary minus dropped")]
    if isinstance(node, ast.BinOp) and isinstance(node.op, (ast.Add, ast.Sub)):
        if _has_text(node.left) or _has_text(node.right):
            return []
        new = copy.deepcopy(node)
        new.op = ast.Sub() if isinstance(node.op, ast.Add) else ast.Add()
        return [(new, "`+` -> `-`" if isinstance(node.op, ast.Add) else "`-` -> `+`")]
    if isinstance(node, ast.AugAssign) and isinstance(node.op, (ast.Add, ast.Sub)):
        new = copy.deepcopy(node)
        new.op = ast.Sub() if isinstance(node.op, ast.Add) else ast.Add()
        return [(new, "`+=` -> `-=`" if isinstance(node.op, ast.Add) else "`-=` -> `+=`")]
    return []


def _axis(node: ast.AST, parent: ast.AST | None, ctx: Context) -> list[tuple[ast.AST, str]]:
    if not (isinstance(node, ast.keyword) and node.arg == "axis"):
        return []
    k = _int_of(node.value)
    if k is None:
        return []
    ndim = 3 if ctx.multi_asset else 2
    here = k % ndim
    out = []
    for a in range(ndim):
        if a != here:
            out.append((ast.keyword("axis", ast.Constant(a)), f"`axis={k}` -> `axis={a}`"))
    return out


def _call_put(node: ast.AST, parent: ast.AST | None, ctx: Context) -> list[tuple[ast.AST, str]]:
    if not (isinstance(node, ast.BinOp) and isinstance(node.op, ast.Sub)):
        return []
    if _has_text(node.left) or _has_text(node.right) or ast.dump(node.left) == ast.dump(node.right):
        return []
    new = ast.BinOp(copy.deepcopy(node.right), ast.Sub(), copy.deepcopy(node.left))
    return [(new, f"`{ast.unparse(node.left)} - {ast.unparse(node.right)}` -> `{ast.unparse(new)}`")]


_OVER_DATES = frozenset({"all", "any", "max", "min", "amax", "amin", "nanmax", "nanmin", "prod"})
_NUMPY_NAMES = frozenset({"np", "numpy"})


def _at_maturity(node: ast.AST, parent: ast.AST | None, ctx: Context) -> list[tuple[ast.AST, str]]:
    if not (isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute) and node.func.attr in _OVER_DATES):
        return []
    func = node.func
    numpy_form = isinstance(func.value, ast.Name) and func.value.id in _NUMPY_NAMES
    if numpy_form:
        if not node.args:
            return []
        target, rest = node.args[0], node.args[1:]
    else:
        target, rest = func.value, node.args
    axis = next((kw.value for kw in node.keywords if kw.arg == "axis"), rest[0] if rest else None)
    k = _int_of(axis) if axis is not None else None
    dates_axis = k == 1 or (k == -1 and not ctx.multi_asset)
    if not dates_axis:
        return []
    last = ast.Subscript(copy.deepcopy(target), ast.Tuple([ast.Slice(), _int_node(-1)], ast.Load()), ast.Load())
    return [(last, f"`{func.attr}` over the dates -> the last date only")]


def _rebate(node: ast.AST, parent: ast.AST | None, ctx: Context) -> list[tuple[ast.AST, str]]:
    if isinstance(node, ast.Attribute) and isinstance(node.ctx, ast.Load) and "rebate" in node.attr.lower():
        return [(ast.Constant(0.0), f"rebate term `{ast.unparse(node)}` -> `0.0`")]
    if isinstance(node, ast.Name) and isinstance(node.ctx, ast.Load) and "rebate" in node.id.lower():
        return [(ast.Constant(0.0), f"rebate term `{node.id}` -> `0.0`")]
    return []


def _strike_spot(node: ast.AST, parent: ast.AST | None, ctx: Context) -> list[tuple[ast.AST, str]]:
    obs = sorted(ctx.obs_names)
    if not obs:
        return []
    if _is_self_attr(node, ctx, ctx.strike_params) and isinstance(node.ctx, ast.Load):
        new = ast.Attribute(ast.Name(obs[0], ast.Load()), "s0", ast.Load())
        return [(new, f"strike `{ast.unparse(node)}` -> spot `{ast.unparse(new)}`")]
    if _is_obs_attr(node, ctx, "s0") and ctx.strike_params and ctx.self_name:
        new = ast.Attribute(ast.Name(ctx.self_name, ast.Load()), ctx.strike_params[0], ast.Load())
        return [(new, f"spot `{ast.unparse(node)}` -> strike `{ast.unparse(new)}`")]
    return []


_METADATA = frozenset({"shape", "ndim", "size", "dtype", "flags", "nbytes", "itemsize"})


def _fixing(node: ast.AST, parent: ast.AST | None, ctx: Context) -> list[tuple[ast.AST, str]]:
    if not (_is_obs_attr(node, ctx, "s") and isinstance(node.ctx, ast.Load)):
        return []
    if isinstance(parent, ast.Subscript) and parent.value is node:
        return []  # obs.s[...] picks its dates itself: the index operators cover it
    if isinstance(parent, ast.Attribute) and parent.attr in _METADATA:
        return []  # obs.s.shape, obs.s.ndim: not a read of the fixings
    text = ast.unparse(node)
    first = ast.Subscript(copy.deepcopy(node), ast.Tuple([ast.Slice(), ast.Slice(lower=ast.Constant(1))],
                                                         ast.Load()), ast.Load())
    last = ast.Subscript(copy.deepcopy(node), ast.Tuple([ast.Slice(), ast.Slice(upper=_int_node(-1))],
                                                        ast.Load()), ast.Load())
    return [(first, f"first date left out of `{text}`"), (last, f"last date left out of `{text}`")]


OPERATORS: dict[str, Operator] = {
    op.name: op
    for op in (
        Operator("compare_strict", "a strict comparison made non-strict or back (< and <=, > and >=)",
                 _compare_with(_STRICT)),
        Operator("compare_side", "a comparison tested on the wrong side (< and >, <= and >=, == and !=)",
                 _compare_with(_SIDE)),
        Operator("max_min", "max and min swapped (np.maximum/np.minimum, max/min, .max()/.min())", _max_min),
        Operator("index_shift", "an index or slice bound off by one date (or asset)", _index_shift),
        Operator("discount", "an exp(-r t) factor dropped or squared", _discount),
        Operator("sign", "a sign flipped (unary minus dropped, + and - swapped)", _sign),
        Operator("axis", "a reduction over the wrong axis (axis=1 -> axis=0)", _axis),
        Operator("call_put", "the operands of a difference swapped (S - K <-> K - S)", _call_put),
        Operator("at_maturity", "an all/any/max/min/prod over the dates replaced by the last date", _at_maturity),
        Operator("rebate", "a rebate term set to 0", _rebate),
        Operator("strike_spot", "strike and today's spot swapped", _strike_spot),
        Operator("fixing", "a fixing left out (the first or last date sliced off obs.s)", _fixing),
    )
}
"""Every mutation operator, by name."""


# ----------------------------------------------------------------------------------------
# mutations of one function


@dataclass(frozen=True)
class Mutation:
    """One change to one function: where, what, and the mutated function's source.

    ``line`` is the line of the changed node in the source the function was parsed from;
    ``diff`` a unified diff of that source (``difflib``) with that one change; ``source``
    the mutated function as :func:`ast.unparse` writes it (decorators and annotations
    left out: they do not change what it computes), which is what gets compiled.
    """

    operator: str
    description: str
    function: str
    line: int
    col: int
    node_index: int
    diff: str
    source: str
    params_involved: tuple[str, ...] = ()


def _preorder(root: ast.AST) -> Iterator[tuple[ast.AST, ast.AST | None, str | None, int | None]]:
    """Every node under ``root`` with its parent, field and list index, in a fixed order."""
    stack: list[tuple[ast.AST, ast.AST | None, str | None, int | None]] = [(root, None, None, None)]
    while stack:
        node, parent, fld, idx = stack.pop()
        yield node, parent, fld, idx
        children = []
        for name, value in ast.iter_fields(node):
            if isinstance(value, list):
                for i, v in enumerate(value):
                    if isinstance(v, ast.AST):
                        children.append((v, node, name, i))
            elif isinstance(value, ast.AST):
                children.append((value, node, name, None))
        stack.extend(reversed(children))


_SKIP_SUBTREES = (ast.Raise, ast.Assert, ast.JoinedStr, ast.FunctionDef, ast.AsyncFunctionDef, ast.Lambda,
                  ast.ClassDef)


def _mutable_nodes(fn: ast.FunctionDef) -> Iterator[tuple[int, ast.AST, ast.AST | None, str | None, int | None]]:
    """``(index, node, parent, field, list index)`` of the nodes of a function's body that
    may be mutated: not the signature, decorators or docstring, nothing under ``raise``,
    ``assert`` or an f-string (messages), no nested definition (not in scope)."""
    keep: set[int] = {id(s) for s in fn.body}
    for i, (node, parent, fld, idx) in enumerate(_preorder(fn)):
        if node is fn:
            continue
        if id(node) not in keep and not (parent is not None and id(parent) in keep and parent is not fn):
            continue
        if isinstance(node, _SKIP_SUBTREES) or (isinstance(node, ast.Expr) and isinstance(node.value, ast.Constant)):
            keep.discard(id(node))  # neither it nor its children are mutated
            continue
        keep.add(id(node))
        yield i, node, parent, fld, idx


def _strip(fn: ast.FunctionDef) -> ast.FunctionDef:
    """A deep copy without decorators and annotations (what gets compiled)."""
    fn = copy.deepcopy(fn)
    fn.decorator_list = []
    fn.returns = None
    for a in fn.args.posonlyargs + fn.args.args + fn.args.kwonlyargs:
        a.annotation = None
    for a in (fn.args.vararg, fn.args.kwarg):
        if a is not None:
            a.annotation = None
    return fn


_ATOMS = (ast.Name, ast.Constant, ast.Attribute, ast.Subscript, ast.Call, ast.keyword, ast.List, ast.Tuple)


def _splice(lines: list[str], node: ast.AST, new: ast.AST) -> list[str]:
    """The source lines with ``node``'s text replaced by the text of ``new`` (for the diff;
    columns are UTF-8 byte offsets, as :mod:`ast` gives them)."""
    text = ast.unparse(new)
    if not isinstance(new, _ATOMS + (ast.stmt,)) and type(new) is not type(node):
        text = f"({text})"
    first = lines[node.lineno - 1].encode("utf-8")  # type: ignore[attr-defined]
    last = lines[node.end_lineno - 1].encode("utf-8")  # type: ignore[attr-defined]
    joined = first[: node.col_offset] + text.encode("utf-8") + last[node.end_col_offset:]  # type: ignore[attr-defined]
    if not joined.endswith(b"\n") and lines[node.end_lineno - 1].endswith("\n"):  # type: ignore[attr-defined]
        joined += b"\n"
    return lines[: node.lineno - 1] + [joined.decode("utf-8")] + lines[node.end_lineno:]  # type: ignore[attr-defined]


def _diff(lines: list[str], new_lines: list[str], first: int, last: int, filename: str, context: int = 1) -> str:
    """Unified diff of a change confined to lines ``first..last`` (1-based), computed on a
    window around them so the hunk header carries the file's own line numbers."""
    lo = max(first - 1 - context, 0)
    hi_old = min(last + context, len(lines))
    hi_new = hi_old + (len(new_lines) - len(lines))
    old_w, new_w = lines[lo:hi_old], new_lines[lo:hi_new]
    out = [f"--- a/{filename}\n", f"+++ b/{filename}\n"]
    for group in difflib.SequenceMatcher(None, old_w, new_w).get_grouped_opcodes(context):
        i1, i2, j1, j2 = group[0][1], group[-1][2], group[0][3], group[-1][4]
        out.append(f"@@ -{lo + i1 + 1},{i2 - i1} +{lo + j1 + 1},{j2 - j1} @@\n")
        for tag, a1, a2, b1, b2 in group:
            if tag == "equal":
                out.extend(" " + x for x in old_w[a1:a2])
                continue
            out.extend("-" + x for x in old_w[a1:a2])
            out.extend("+" + x for x in new_w[b1:b2])
    return "".join(x if x.endswith("\n") else x + "\n" for x in out)


def _self_params(node: ast.AST, ctx: Context) -> tuple[str, ...]:
    found: list[str] = []
    for n in ast.walk(node):
        if _is_self_attr(n, ctx, ctx.params) and n.attr not in found:  # type: ignore[union-attr]
            found.append(n.attr)  # type: ignore[union-attr]
    return tuple(found)


def _statements(fn: ast.FunctionDef) -> dict[int, ast.stmt]:
    """The innermost statement holding each node of a function."""
    owner: dict[int, ast.stmt] = {}
    for stmt in ast.walk(fn):
        if isinstance(stmt, ast.stmt) and stmt is not fn:
            for n in ast.walk(stmt):
                owner[id(n)] = stmt  # ast.walk is breadth-first: inner statements come later
    return owner


def function_mutations(
    fn: ast.FunctionDef,
    source: str,
    ctx: Context,
    operators: Sequence[str] | None = None,
    *,
    filename: str = "<source>",
    qualname: str | None = None,
) -> list[Mutation]:
    """Every mutation the operators propose for one function, de-duplicated.

    Parameters
    ----------
    fn
        The function's node, parsed from ``source`` (so its line numbers are lines of it).
        It is not modified.
    source
        The text ``fn`` was parsed from (a whole module, or a snippet).
    ctx
        What the operators may know (argument names, parameters, asset axis).
    operators
        Operator names (default: all of :data:`OPERATORS`).
    filename
        Shown in the diff headers.
    qualname
        The function's qualified name (default its name).

    Returns
    -------
    list of Mutation
        In source order; a change that yields the same function as another, or as the
        original, is dropped.
    """
    names = list(OPERATORS) if operators is None else list(operators)
    unknown = [n for n in names if n not in OPERATORS]
    if unknown:
        raise InputError(
            f"operator={unknown[0]!r} is not a mutation operator; choose from {', '.join(OPERATORS)}"
        )
    lines = source.splitlines(keepends=True)
    work = _strip(fn)
    seen = {ast.unparse(work)}
    owners = _statements(work)
    out: list[Mutation] = []
    qual = qualname or fn.name
    for index, node, parent, fld, idx in list(_mutable_nodes(work)):
        for name in names:
            for new, description in OPERATORS[name].apply(node, parent, ctx):
                assert parent is not None and fld is not None
                ast.copy_location(new, node)
                ast.fix_missing_locations(new)
                if idx is None:
                    setattr(parent, fld, new)
                else:
                    getattr(parent, fld)[idx] = new
                try:
                    text = ast.unparse(work)
                finally:
                    if idx is None:
                        setattr(parent, fld, node)
                    else:
                        getattr(parent, fld)[idx] = node
                if text in seen:
                    continue
                seen.add(text)
                new_lines = _splice(lines, node, new)
                diff = _diff(lines, new_lines, node.lineno, node.end_lineno, filename)  # type: ignore[attr-defined]
                stmt = owners.get(id(node))
                involved = _self_params(node, ctx) or (_self_params(stmt, ctx) if stmt is not None else ())
                out.append(Mutation(
                    operator=name, description=description, function=qual, line=node.lineno,  # type: ignore[attr-defined]
                    col=node.col_offset, node_index=index, diff=diff, source=text,  # type: ignore[attr-defined]
                    params_involved=involved,
                ))
    order = list(OPERATORS)
    out.sort(key=lambda m: (m.line, m.col, order.index(m.operator)))
    return out


# ----------------------------------------------------------------------------------------
# scope: the functions of a product that are mutated


@dataclass(frozen=True)
class Scoped:
    """One in-scope function: its qualified name, kind, defining class and parsed node."""

    qualname: str
    name: str
    kind: str  # "method", "property", "cached_property", "staticmethod", "classmethod", "function"
    owner: type | None
    func: types.FunctionType
    node: ast.FunctionDef


@dataclass(frozen=True)
class _ModuleSource:
    module: types.ModuleType
    file: str
    text: str
    tree: ast.Module


_SOURCES: dict[str, _ModuleSource] = {}


def _module_source(module: types.ModuleType) -> _ModuleSource:
    name = module.__name__
    cached = _SOURCES.get(name)
    if cached is not None:
        return cached
    try:
        file = inspect.getsourcefile(module) or ""
        text = Path(file).read_text(encoding="utf-8")
    except (TypeError, OSError) as exc:
        raise InputError(f"module {name!r} has no readable source file, so it cannot be mutated: {exc}") from exc
    src = _ModuleSource(module, file, text, ast.parse(text, filename=file))
    _SOURCES[name] = src
    return src


def _unwrap(raw: Any) -> tuple[str, Any] | None:
    import functools

    if isinstance(raw, types.FunctionType):
        return "method", raw
    if isinstance(raw, staticmethod):
        return "staticmethod", raw.__func__
    if isinstance(raw, classmethod):
        return "classmethod", raw.__func__
    if isinstance(raw, property) and isinstance(raw.fget, types.FunctionType):
        return "property", raw.fget
    if isinstance(raw, functools.cached_property):
        return "cached_property", raw.func
    return None


def _find_node(tree: ast.Module, func: types.FunctionType) -> ast.FunctionDef | None:
    parts = func.__qualname__.split(".")
    body: list[ast.stmt] = tree.body
    for part in parts[:-1]:
        cls_node = next((n for n in body if isinstance(n, ast.ClassDef) and n.name == part), None)
        if cls_node is None:
            return None
        body = cls_node.body
    first = func.__code__.co_firstlineno
    candidates = [n for n in body if isinstance(n, ast.FunctionDef) and n.name == parts[-1]]
    for n in candidates:
        starts = [n.lineno] + [d.lineno for d in n.decorator_list]
        if first in starts:
            return n
    return candidates[-1] if candidates else None


def _plain(func: types.FunctionType) -> bool:
    return "<locals>" not in func.__qualname__ and set(func.__code__.co_freevars) <= {"__class__"}


def _class_entry(cls: type, attr: str, src: _ModuleSource) -> Scoped | None:
    for klass in cls.__mro__:
        if attr in vars(klass):
            raw = vars(klass)[attr]
            owner = klass
            break
    else:
        return None
    if owner.__module__ != src.module.__name__:
        return None
    unwrapped = _unwrap(raw)
    if unwrapped is None or not _plain(unwrapped[1]):
        return None
    kind, func = unwrapped
    node = _find_node(src.tree, func)
    if node is None:
        return None
    return Scoped(func.__qualname__, attr, kind, owner, func, node)


def _function_entry(name: str, src: _ModuleSource) -> Scoped | None:
    func = vars(src.module).get(name)
    if not (isinstance(func, types.FunctionType) and func.__module__ == src.module.__name__
            and func.__qualname__ == func.__name__ == name and _plain(func)):
        return None
    node = _find_node(src.tree, func)
    if node is None:
        return None
    return Scoped(name, name, "function", None, func, node)


def _first_arg(fn: ast.FunctionDef) -> str | None:
    args = fn.args.posonlyargs + fn.args.args
    return args[0].arg if args else None


def payoff_scope(cls: type[Product]) -> list[Scoped]:
    """The functions of ``cls`` that are mutated: the cash-flow methods (:data:`ROOTS`) as
    the class resolves them, and every helper they reach defined in the product's module
    (module functions they call or name; methods and properties reached through ``self.``),
    in discovery order."""
    module = sys.modules[cls.__module__]
    src = _module_source(module)
    found: dict[str, Scoped] = {}
    queue: list[Scoped] = []
    for root in ROOTS:
        e = _class_entry(cls, root, src)
        if e is not None and e.qualname not in found:
            found[e.qualname] = e
            queue.append(e)
    while queue:
        e = queue.pop(0)
        me = _first_arg(e.node) if e.kind in ("method", "property", "cached_property", "classmethod") else None
        for node in ast.walk(e.node):
            new: Scoped | None = None
            if isinstance(node, ast.Name) and isinstance(node.ctx, ast.Load):
                new = _function_entry(node.id, src)
            elif (me is not None and isinstance(node, ast.Attribute) and isinstance(node.value, ast.Name)
                  and node.value.id == me and node.attr not in NOT_HELPERS):
                new = _class_entry(cls, node.attr, src)
            if new is not None and new.qualname not in found:
                found[new.qualname] = new
                queue.append(new)
    return list(found.values())


def _context(cls: type[Product], entry: Scoped, obs_name: str) -> Context:
    params = frozenset(cls.param_specs())
    strikes = tuple(p for p in cls.param_specs() if "strike" in p.lower())
    args = [a.arg for a in entry.node.args.posonlyargs + entry.node.args.args + entry.node.args.kwonlyargs]
    self_name = args[0] if entry.kind in ("method", "property", "cached_property") and args else None
    obs_names = frozenset(a for a in args if a in ("obs", obs_name))
    return Context(self_name=self_name, obs_names=obs_names, params=params, strike_params=strikes,
                   multi_asset=bool(cls.multi_asset))


# ----------------------------------------------------------------------------------------
# mutants: compiled classes


@dataclass(frozen=True)
class Mutant:
    """A compiled mutant product class and the mutation it carries."""

    id: str
    original: type[Product]
    cls: type[Product]
    mutation: Mutation
    file: str

    @property
    def location(self) -> str:
        return f"{_display_path(self.file)}:{self.mutation.line}"


@dataclass(frozen=True)
class Discarded:
    """A mutation whose mutant could not be built (it does not compile)."""

    product: str
    operator: str
    location: str
    description: str
    reason: str


def _display_path(file: str) -> str:
    try:
        rel = os.path.relpath(file)
    except ValueError:
        return file
    return file if rel.startswith("..") else rel


def _rebind(func: types.FunctionType, ns: dict) -> types.FunctionType:
    new = types.FunctionType(func.__code__, ns, func.__name__, func.__defaults__, func.__closure__)
    new.__kwdefaults__ = copy.copy(func.__kwdefaults__)
    new.__qualname__ = func.__qualname__
    new.__dict__.update(func.__dict__)
    new.__doc__ = func.__doc__
    return new


def _compile_function(source: str, ns: dict, entry: Scoped, label: str) -> types.FunctionType:
    """Compile a (mutated) function's source in the namespace ``ns``; ``super()`` keeps
    meaning the class the original was defined in (the ``__class__`` cell is supplied)."""
    name = entry.node.name
    body = textwrap.indent(source, "    ")
    maker_name = "__limitcase_mutant__"
    text = f"def {maker_name}(__class__):\n{body}\n    return {name}\n"
    code = compile(text, f"<mutant {label}>", "exec")
    exec(code, ns)  # noqa: S102 - generated from the product's own source
    maker = ns.pop(maker_name)
    func = maker(entry.owner)
    func.__qualname__ = entry.func.__qualname__
    func.__doc__ = entry.func.__doc__
    return func


def _wrap(kind: str, func: types.FunctionType) -> Any:
    import functools

    if kind == "staticmethod":
        return staticmethod(func)
    if kind == "classmethod":
        return classmethod(func)
    if kind == "property":
        return property(func)
    if kind == "cached_property":
        cp = functools.cached_property(func)
        cp.__set_name__(None, func.__name__)
        return cp
    return func


def build_mutant_class(cls: type[Product], scope: Sequence[Scoped], target: Scoped,
                       source: str, label: str = "") -> type[Product]:
    """The subclass of ``cls`` whose in-scope functions are rebound to a copy of the
    module's namespace, with ``target`` replaced by the compiled ``source``."""
    module = sys.modules[cls.__module__]
    ns = dict(vars(module))
    rebound: dict[str, types.FunctionType] = {}
    for e in scope:
        fn = _compile_function(source, ns, e, label) if e is target else _rebind(e.func, ns)
        rebound[e.qualname] = fn
        if e.kind == "function":
            ns[e.name] = fn
    body: dict[str, Any] = {}
    for e in scope:
        if e.kind != "function":
            body[e.name] = _wrap(e.kind, rebound[e.qualname])
    body.update(__module__=cls.__module__, __qualname__=cls.__qualname__, __doc__=cls.__doc__,
                mutant_of=cls)
    return type(cls)(cls.__name__, (cls,), body)


_MUTATIONS: dict[tuple, list[Mutation]] = {}
"""Mutations of a shared function (a base class's payoff) are made once per context."""


def make_mutants(cls: type[Product], operators: Sequence[str] | None = None
                 ) -> tuple[list[Mutant], list[Discarded]]:
    """Every mutant of a product class (see the module docstring for the scope), and the
    mutations discarded because their mutant does not compile."""
    scope = payoff_scope(cls)
    if not scope:
        return [], []
    src = _module_source(sys.modules[cls.__module__])
    payoff_entry = next((e for e in scope if e.name in ("payoff", "exercise_value")), None)
    obs_name = "obs"
    if payoff_entry is not None:
        args = payoff_entry.node.args.posonlyargs + payoff_entry.node.args.args
        if len(args) >= 2:
            obs_name = args[1].arg
    mutants: list[Mutant] = []
    discarded: list[Discarded] = []
    disp = _display_path(src.file)
    for entry in scope:
        ctx = _context(cls, entry, obs_name)
        key = (src.module.__name__, entry.qualname, ctx, tuple(operators or ()))
        found = _MUTATIONS.get(key)
        if found is None:
            found = _MUTATIONS[key] = function_mutations(entry.node, src.text, ctx, operators, filename=disp,
                                                         qualname=entry.qualname)
        for mutation in found:
            location = f"{disp}:{mutation.line}"
            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    mutant_cls = build_mutant_class(cls, scope, entry, mutation.source, location)
            except Exception as exc:  # a mutant that does not compile is discarded
                discarded.append(Discarded(cls.__name__, mutation.operator, location, mutation.description,
                                           f"{type(exc).__name__}: {exc}"))
                continue
            mutants.append(Mutant(f"{cls.__name__}#{len(mutants) + 1}", cls, mutant_cls, mutation, src.file))
    return mutants, discarded


# ----------------------------------------------------------------------------------------
# equivalence


@dataclass(frozen=True)
class PointDifference:
    """How a mutant compares with the original at one parameter point of the checks.

    ``edge_differences`` of ``edge_paths`` deterministic paths differ; ``random_violations``
    of ``random_paths`` simulated paths differ (``None`` when not simulated); ``difference``
    is the mean present-value difference mutant - original on those paths and ``stderr``
    its standard error; ``reference_price`` the original's mean present value there and
    ``price_sd`` the standard deviation of the mutant's present value per path; ``note`` says
    when one side raised or the dates differ.
    """

    point: str
    edge_paths: int = 0
    edge_differences: int = 0
    random_paths: int = 0
    random_violations: int | None = None
    difference: float | None = None
    stderr: float | None = None
    reference_price: float | None = None
    price_sd: float | None = None
    note: str = ""

    @property
    def differs(self) -> bool:
        return bool(self.edge_differences or self.random_violations or self.note)

    @property
    def differs_on_random(self) -> bool:
        return bool(self.random_violations) or bool(self.note)


@dataclass(frozen=True)
class Equivalence:
    """The verdict of the equivalence test over every parameter point."""

    equivalent: bool
    points: tuple[PointDifference, ...]

    @property
    def edge_only(self) -> bool:
        """Real, but different only on deterministic edge paths (never on random ones)."""
        return (not self.equivalent) and not any(p.differs_on_random for p in self.points)

    def to_dict(self) -> dict:
        return {"equivalent": self.equivalent, "edge_only": self.edge_only,
                "points": [_json_safe(asdict(p)) for p in self.points]}


@dataclass(frozen=True)
class Point:
    """A parameter point of the checks: the product there and the model it is priced under."""

    product: Product
    model: Model
    label: str


def _model_label(model: Model, scenario: Model) -> str:
    if type(model) is not type(scenario):
        return model.label()
    here, base = model.params(), scenario.params()
    changed = []
    for k, v in here.items():
        b = base.get(k)
        same = np.array_equal(np.asarray(v), np.asarray(b)) if b is not None else False
        if not same:
            changed.append(f"{k}={_short(v)}")
    return f"model {', '.join(changed)}" if changed else ""


def _short(v: Any) -> str:
    if isinstance(v, float):
        return "inf" if v == math.inf else "-inf" if v == -math.inf else f"{v:g}"
    if isinstance(v, np.ndarray):
        return np.array2string(v, precision=3, separator=",").replace("\n", "")
    return repr(v)


def check_points(cls: type[Product], checks: Sequence[Check] | None = None) -> list[Point]:
    """The parameter points the checks of ``cls`` price the product itself at: the product
    at its defaults under its scenario, then every leg of every check that is an instance
    of ``cls`` (reduction limits, relation legs), with that check's model; de-duplicated."""
    base = cls()
    scenario = base.scenario()
    checks = checks_for(cls) if checks is None else checks
    points: list[Point] = []
    seen: set[str] = set()

    def add(p: Product, m: Model) -> None:
        key = repr(sorted(p.params().items())) + "|" + repr(type(m)) + repr(m)
        if key in seen:
            return
        seen.add(key)
        extra = _model_label(m, scenario)
        points.append(Point(p, m, p.label() + (f" [{extra}]" if extra else "")))

    add(base, scenario)
    for c in checks:
        if c.error is not None or c.model is None:
            continue
        for leg in c.legs:
            if type(leg) is cls:
                add(leg, c.model)
    return points


def probe_point(cls: type[Product]) -> Point | None:
    """A parameter point no check uses: every finite positive real parameter of the
    defaults moved up by 10% and every count up by one (where the range allows), under the
    scenario. A mutant equivalent at the check points but not here is a bug the checks are
    placed too narrowly to see (e.g. every check has the strike at the spot)."""
    base = cls()
    changes: dict[str, Any] = {}
    specs = cls.param_specs()
    for name, value in base.params().items():
        spec = specs[name]
        if spec.integer and math.isfinite(value):
            candidate: Any = value + 1
        elif isinstance(value, float) and math.isfinite(value) and value > 0:
            candidate = value * 1.1
        else:
            continue
        if spec.contains(float(candidate)):
            changes[name] = candidate
    for attempt in (changes, {k: v for k, v in changes.items() if not specs[k].integer}):
        try:
            p = base.replace(**attempt)
            return Point(p, p.scenario(), p.label() + " [off the check points]")
        except LimitcaseError:
            continue
    return None


def probe_difference(mutant_cls: type[Product], original: type[Product], *, paths: int = EQUIVALENCE_PATHS,
                     seed: int = DEFAULT_SEED) -> PointDifference | None:
    """How the mutant compares with the original at :func:`probe_point` (``None`` if no
    such point can be made)."""
    pt = probe_point(mutant_cls)
    if pt is None:
        return None
    orig = original(**pt.product.params())
    n, bad, note = _edge_compare(orig, pt.product, pt.model, seed)
    if note and "dates" in note:
        return PointDifference(pt.label, n, bad, note=note)
    v, diff, se, price, sd, rnote = _random_compare(orig, pt.product, pt.model, paths, seed,
                                                    case_key(original.__name__, "mutation-probe"))
    return PointDifference(pt.label, n, bad, paths, v, diff, se, price, sd, note or rnote)


def _levels(product: Product, s0: np.ndarray) -> list[float]:
    levels: list[float] = []
    for v in list(np.ravel(s0)) + [v for v in product.params().values() if isinstance(v, float)]:
        v = float(v)
        if math.isfinite(v) and v > 0 and not any(abs(v - u) <= 1e-12 * v for u in levels):
            levels.append(v)
    return levels


def edge_paths(t: np.ndarray, s0: float, levels: Sequence[float]) -> np.ndarray:
    """Deterministic price paths ``(paths, dates)`` that sit on the levels the payoff
    compares with: flat at the spot, at half and twice the spot, flat at each level,
    ending exactly at each level, touching each level on the first, a middle and the last
    date, touching one level in the middle and ending on another, rising and falling."""
    n = len(t)
    rows = [np.full(n, s0), np.full(n, 0.5 * s0), np.full(n, 2.0 * s0),
            s0 * np.exp(0.5 * t / t[-1]), s0 * np.exp(-0.5 * t / t[-1])]
    touch = sorted({0, n // 2, n - 1})
    for level in levels:
        rows.append(np.full(n, level))
        rows.append(np.linspace(s0, level, n + 1)[1:])
        for j in touch:
            r = np.full(n, s0)
            r[j] = level
            rows.append(r)
    for a, b in itertools.permutations(levels, 2):
        r = np.full(n, s0)
        r[n // 2] = a
        r[-1] = b
        rows.append(r)
        r = np.full(n, a)
        r[-1] = b
        rows.append(r)
    return np.array(rows, dtype=float)


def _edge_observed(product: Product, model: Model, seed: int) -> Observed:
    t = product.validated_dates()
    s0_all = np.asarray(model.initial(), dtype=float)
    levels = _levels(product, s0_all)
    if product.multi_asset:
        k = s0_all.size
        blocks = []
        base = np.broadcast_to(s0_all, (len(t), k))
        per_asset = [edge_paths(t, float(s0_all[i]), levels) for i in range(k)]
        m = per_asset[0].shape[0]
        together = np.stack([per_asset[i] for i in range(k)], axis=2)  # every asset on its pattern
        blocks.append(together)
        for i in range(k):
            b = np.broadcast_to(base, (m, len(t), k)).copy()
            b[:, :, i] = per_asset[i]
            blocks.append(b)
        s = np.concatenate(blocks, axis=0)
        s0: Any = s0_all
        dividend: Any = np.asarray(model.dividend_yields(), dtype=float)
    else:
        s = edge_paths(t, float(s0_all[0]), levels)
        s0 = float(s0_all[0])
        dividend = float(np.asarray(model.dividend_yields())[0])
    s.flags.writeable = False
    zeros = np.zeros((1, len(t), model.normals_per_step()))
    sim = model.simulate(t, zeros, np.random.default_rng(seed))
    var = np.broadcast_to(sim.step_var, sim.s.shape)[0]  # (dates, assets)
    if not product.multi_asset:
        var = var[:, 0]
    shape = s.shape

    def step_var() -> np.ndarray:
        return np.broadcast_to(var, shape)

    u = np.random.default_rng(seed).random(shape)
    u.flags.writeable = False
    return Observed(t, s, s0, model.short_rate, step_var, dividend, lambda: u)


def _flows(product: Product, obs: Observed) -> tuple[str, Any, Any]:
    """What a product pays on given paths: exercise values, or amounts and times."""
    try:
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if product.early_exercise:
                return "exercise", np.asarray(product.exercise_value(obs), dtype=float), None
            out = product.payoff(obs)
            if isinstance(out, Cashflows):
                amount = np.asarray(out.amount, dtype=float)
                return "cashflows", amount, np.broadcast_to(np.asarray(out.time, dtype=float), amount.shape)
            return "array", np.asarray(out, dtype=float), None
    except Exception as exc:
        return "raised", type(exc).__name__, None


def _close(a: Any, b: Any) -> np.ndarray | bool:
    if a is None or b is None:
        return a is None and b is None
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    if a.shape != b.shape:
        return False
    return np.isclose(a, b, rtol=TOLERANCE.rtol, atol=TOLERANCE.atol, equal_nan=True)


def _edge_compare(original: Product, mutant: Product, model: Model, seed: int) -> tuple[int, int, str]:
    """``(paths, differing paths, note)`` on the deterministic edge paths."""
    try:
        d0 = original.validated_dates()
    except Exception as exc:
        return 0, 0, f"the original's dates raise {type(exc).__name__}"
    try:
        d1 = mutant.validated_dates()
        e0, e1 = np.asarray(original.exercise_dates(), float), np.asarray(mutant.exercise_dates(), float)
    except Exception as exc:
        return 0, 0, f"the mutant's dates raise {type(exc).__name__}: {exc}"
    if d0.shape != d1.shape or not np.allclose(d0, d1, rtol=1e-12, atol=0.0):
        return 0, 0, "the dates differ"
    if e0.shape != e1.shape or not np.allclose(e0, e1, rtol=1e-12, atol=0.0):
        return 0, 0, "the exercise dates differ"
    obs0 = _edge_observed(original, model, seed)
    obs1 = _edge_observed(mutant, model, seed)
    n = obs0.paths
    k0, a0, t0 = _flows(original, obs0)
    k1, a1, t1 = _flows(mutant, obs1)
    if k0 == "raised" or k1 == "raised":
        if k0 == k1 and a0 == a1:
            return n, 0, ""
        side = "the mutant" if k1 == "raised" else "the original"
        return n, n, f"on the edge paths {side} raises {a1 if k1 == 'raised' else a0}"
    if k0 != k1:
        return n, n, f"the mutant returns {k1} where the original returns {k0}"
    same = _close(a0, a1)
    if isinstance(same, bool):
        return n, (0 if same else n), ("" if same else "the mutant's cash flows have another shape")
    ok = same.reshape(n, -1).all(axis=1) if same.ndim else np.full(n, bool(same))
    if t0 is not None:
        st = _close(t0, t1)
        if isinstance(st, bool):
            ok = ok & st
        else:
            ok = ok & st.reshape(n, -1).all(axis=1)
    return n, int((~ok).sum()), ""


def _random_compare(original: Product, mutant: Product, model: Model, paths: int, seed: int, key: int
                    ) -> tuple[int | None, float | None, float | None, float | None, float | None, str]:
    """``(violations, difference, stderr, original price, mutant's sd, note)`` on simulated paths."""
    kw = dict(paths=paths, seed=seed, key=key, regression_paths=EQUIVALENCE_REGRESSION_PATHS)
    try:
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            joint = evaluate([mutant, original], model, rules=(TOLERANCE,), **kw)
    except Exception as exc:
        try:
            with np.errstate(all="ignore"), warnings.catch_warnings():
                warnings.simplefilter("ignore")
                evaluate([original], model, **kw)
        except Exception:
            return 0, None, None, None, None, ""  # both fail alike: the original is broken here
        return None, None, None, None, None, f"the mutant raises on simulated paths: {type(exc).__name__}: {exc}"
    est = joint.estimate((1.0, -1.0))
    sd = math.sqrt(max(float(joint.cov[0, 0]), 0.0))
    return joint.rules[0].violations, est.value, est.stderr, float(joint.mean[1]), sd, ""


def equivalence(mutant_cls: type[Product], original: type[Product], *, paths: int = EQUIVALENCE_PATHS,
                seed: int = DEFAULT_SEED, points: Sequence[Point] | None = None, stop_early: bool = False
                ) -> Equivalence:
    """Whether a mutant pays what the original pays at every parameter point of the checks.

    Parameters
    ----------
    mutant_cls, original
        The mutant class and the product class it was made from.
    paths
        Simulated paths per point, compared path by path through the engine.
    seed
        Seed of the simulated paths and of the edge paths' uniforms.
    points
        Parameter points (default: :func:`check_points` of the mutant class).
    stop_early
        Stop at the first point where the mutant differs (enough to know it is real).

    Notes
    -----
    At each point both products must agree on their dates and exercise dates, on every
    deterministic edge path (:func:`edge_paths`), and on every simulated path of the
    point's model (a :class:`~limitcase.engine.PathRule` on their present values, the
    engine's tolerance). Edge paths are tried first at every point (they are cheap), then
    simulated paths.
    """
    pts = check_points(mutant_cls) if points is None else list(points)
    results: list[PointDifference] = []
    name = original.__name__
    edge: list[tuple[Point, Product, int, int, str]] = []
    for pt in pts:
        orig = original(**pt.product.params())
        n, bad, note = _edge_compare(orig, pt.product, pt.model, seed)
        edge.append((pt, orig, n, bad, note))
        if stop_early and (bad or note):
            return Equivalence(False, (PointDifference(pt.label, n, bad, note=note),))
    for i, (pt, orig, n, bad, note) in enumerate(edge):
        if note and "dates" in note:
            results.append(PointDifference(pt.label, n, bad, note=note))
            if stop_early:
                break
            continue
        v, diff, se, price, sd, rnote = _random_compare(orig, pt.product, pt.model, paths, seed,
                                                        case_key(name, "mutation-equivalence", str(i)))
        pd = PointDifference(pt.label, n, bad, paths, v, diff, se, price, sd, note or rnote)
        results.append(pd)
        if stop_early and pd.differs:
            break
    equivalent = not any(p.differs for p in results)
    return Equivalence(equivalent, tuple(results))


# ----------------------------------------------------------------------------------------
# running the checks on mutants


@dataclass(frozen=True)
class MutantResult:
    """What became of one mutant.

    ``status`` is ``"caught"`` (a check failed), ``"error"`` (a check errored: the payoff
    raised, returned NaN or a wrong shape; counts as detected), ``"survived"`` or
    ``"equivalent"``. ``detected_by`` names the cases that saw it; ``paths`` the budget at
    which that happened (or at which it survived).
    """

    id: str
    product: str
    module: str
    family: str
    operator: str
    description: str
    function: str
    location: str
    line: int
    diff: str
    status: str
    paths: int = 0
    detected_by: tuple[str, ...] = ()
    message: str = ""
    suggestion: str = ""
    edge_only: bool = False
    params_involved: tuple[str, ...] = ()
    equivalence: dict | None = None
    off_checks: dict | None = None

    @property
    def detected(self) -> bool:
        return self.status in ("caught", "error")

    def to_dict(self) -> dict:
        d = asdict(self)
        d["detected_by"] = list(self.detected_by)
        d["params_involved"] = list(self.params_involved)
        return _json_safe(d)


@dataclass(frozen=True)
class ProductScore:
    """A product's mutation score: ``(caught + error) / (caught + error + survived)``
    (``None`` when it has no non-equivalent mutant)."""

    product: str
    module: str
    family: str
    mutants: int
    caught: int
    error: int
    survived: int
    equivalent: int
    discarded: int
    score: float | None
    false_alarm: bool = False

    def to_dict(self) -> dict:
        return asdict(self)


def score_of(caught: int, error: int, survived: int) -> float | None:
    """The mutation score ``(caught + error) / (caught + error + survived)``; equivalent
    mutants are not counted; ``None`` when nothing was counted."""
    counted = caught + error + survived
    return (caught + error) / counted if counted else None


@dataclass
class MutationReport:
    """Every mutant's fate, the original products' own outcomes, the settings, the time."""

    results: list[MutantResult]
    discarded: list[Discarded]
    originals: dict[str, list[dict]]  # product -> outcomes at the full budget (to_dict)
    false_alarms: list[dict]
    settings: dict
    runtime: float
    products: list[tuple[str, str, str]]  # (name, module, family) in run order

    def counts(self, results: Sequence[MutantResult] | None = None) -> dict[str, int]:
        rs = self.results if results is None else results
        c = {s: 0 for s in ("caught", "error", "survived", "equivalent")}
        for r in rs:
            c[r.status] += 1
        c["total"] = len(rs)
        return c

    @property
    def score(self) -> float | None:
        c = self.counts()
        return score_of(c["caught"], c["error"], c["survived"])

    def survivors(self) -> list[MutantResult]:
        return [r for r in self.results if r.status == "survived"]

    def families(self) -> dict[str, ProductScore]:
        """Scores per family (the module's short name)."""
        out: dict[str, ProductScore] = {}
        for fam in dict.fromkeys(f for _, _, f in self.products):
            rs = [r for r in self.results if r.family == fam]
            c = self.counts(rs)
            out[fam] = ProductScore(
                fam, "", fam, c["total"], c["caught"], c["error"], c["survived"], c["equivalent"],
                sum(1 for d in self.discarded if _family_of_product(self, d.product) == fam),
                score_of(c["caught"], c["error"], c["survived"]),
                any(a["family"] == fam for a in self.false_alarms),
            )
        return out

    def to_dict(self) -> dict:
        """The JSON document of ``limitcase mutate --json``."""
        c = self.counts()
        return _json_safe({
            "tool": "limitcase",
            "format": FORMAT_VERSION,
            "command": "mutate",
            "settings": self.settings,
            "score": self.score,
            "counts": {**c, "discarded": len(self.discarded)},
            "runtime_seconds": round(self.runtime, 2),
            "false_alarms": self.false_alarms,
            "products": [s.to_dict() for s in product_scores(self).values()],
            "families": [s.to_dict() for s in self.families().values()],
            "mutants": [r.to_dict() for r in self.results],
            "discarded": [asdict(d) for d in self.discarded],
            "originals": self.originals,
        })


def _family_of_product(report: MutationReport, product: str) -> str:
    return next((f for n, _, f in report.products if n == product), "")


def _json_safe(x: Any) -> Any:
    if isinstance(x, dict):
        return {k: _json_safe(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_json_safe(v) for v in x]
    if isinstance(x, (np.floating, float)):
        v = float(x)
        if math.isnan(v):
            return None
        if math.isinf(v):
            return 1e308 if v > 0 else -1e308
        return v
    if isinstance(x, np.integer):
        return int(x)
    if isinstance(x, np.bool_):
        return bool(x)
    return x


def family_of(cls: type) -> str:
    """A product's family: its module's short name (``barriers`` for
    ``limitcase_payoffs.barriers``), or the file's stem for a file loaded from a path."""
    mod = cls.__module__
    short = mod.rsplit(".", 1)[-1]
    if short.startswith("limitcase_user_"):
        try:
            return Path(inspect.getsourcefile(cls) or short).stem
        except TypeError:
            return short
    return short


# --- the work a process does ------------------------------------------------------------

_REGISTRY: dict[str, Any] = {}
"""Set before the pool forks: the products and mutants the workers look up by index (a
dynamically built class cannot be pickled, but a forked worker inherits it)."""


def _safe_run(cls: type[Product], paths: int, seed: int, alpha: float, method: str
              ) -> tuple[list[Outcome], str]:
    try:
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            checks = checks_for(cls)
            # mutants change the product, never the model: the model's audit belongs to `check`
            result = run_checks(checks, paths=paths, seed=seed, alpha=alpha, method=method, audit_models=False)
        return result.outcomes, ""
    except Exception as exc:  # the mutant broke the check machinery itself: a visible failure
        return [], f"the check run raised {type(exc).__name__}: {exc}"


def _detection(outcomes: list[Outcome], crash: str, baseline: Sequence[str]) -> tuple[str, list[str], str]:
    """``(status, cases, message)`` of a mutant's run against the original's verdicts
    (``baseline``: the original's verdict per check, in the same order)."""
    if crash:
        return "error", [], crash
    failed, errored, msgs = [], [], []
    for i, o in enumerate(outcomes):
        if i < len(baseline) and baseline[i] != "pass":
            continue  # the original does not pass this case: it cannot detect anything
        if o.verdict == "fail":
            failed.append(o.case)
            msgs.append(f"{o.case}: {o.message}")
        elif o.verdict == "error":
            errored.append(o.case)
            msgs.append(f"{o.case}: {o.message}")
    if failed:
        return "caught", failed, "; ".join(msgs)[:600]
    if errored:
        return "error", errored, "; ".join(msgs)[:600]
    return "survived", [], ""


def _task_original(index: int, paths: int) -> tuple[int, int, list[Outcome], float]:
    s = _REGISTRY["settings"]
    cls = _REGISTRY["products"][index]
    t0 = time.process_time()
    outcomes, crash = _safe_run(cls, paths, s["seed"], s["alpha"], s["method"])
    if crash:
        outcomes = [Outcome(product=cls.__name__, case="(run)", kind="run", verdict="error", message=crash)]
    return index, paths, outcomes, time.process_time() - t0


def _safe_equivalence(mutant: Mutant, paths: int, seed: int, stop_early: bool) -> Equivalence:
    try:
        return equivalence(mutant.cls, mutant.original, paths=paths, seed=seed, stop_early=stop_early)
    except Exception as exc:  # the comparison itself broke on the mutant: it is not equivalent
        return Equivalence(False, (PointDifference("(comparison)", note=f"{type(exc).__name__}: {exc}"),))


def _task_mutant(mid: int, stage: str, baseline: Sequence[str]) -> dict:
    """One mutant's stage: ``"first"`` (equivalence test, stopping at the first difference,
    then the checks with the quick budget) or ``"full"`` (the checks with the full budget,
    then, for a survivor, the complete comparison at every point for the suggestion).
    The result carries the CPU seconds spent comparing (``cpu_equivalence``) and checking
    (``cpu_checks``)."""
    s = _REGISTRY["settings"]
    mutant: Mutant = _REGISTRY["mutants"][mid]
    out: dict[str, Any] = {"mid": mid, "stage": stage, "cpu_equivalence": 0.0, "cpu_checks": 0.0}
    t0 = time.process_time()
    if stage == "first":
        eq = _safe_equivalence(mutant, s["equivalence_paths"], s["seed"], stop_early=True)
        out["equivalence"] = eq
        if eq.equivalent:
            try:
                off = probe_difference(mutant.cls, mutant.original, paths=s["equivalence_paths"], seed=s["seed"])
            except Exception as exc:
                off = PointDifference("(probe)", note=f"{type(exc).__name__}: {exc}")
            out.update(status="equivalent", paths=0, cases=[], message="", probe=off,
                       cpu_equivalence=time.process_time() - t0)
            return out
        paths = s["quick_paths"]
    else:
        paths = s["paths"]
    t1 = time.process_time()
    out["cpu_equivalence"] = t1 - t0
    outcomes, crash = _safe_run(mutant.cls, paths, s["seed"], s["alpha"], s["method"])
    status, cases, message = _detection(outcomes, crash, baseline)
    out.update(status=status, paths=paths, cases=cases, message=message)
    t2 = time.process_time()
    out["cpu_checks"] = t2 - t1
    if status == "survived" and (stage == "full" or s["paths"] <= s["quick_paths"]):
        out["equivalence"] = _safe_equivalence(mutant, s["equivalence_paths"], s["seed"], stop_early=False)
        out["cpu_equivalence"] += time.process_time() - t2
    return out


class _Pool:
    """A fork-based process pool, or the current process when ``workers == 1``."""

    def __init__(self, workers: int) -> None:
        self.workers = workers
        self.executor: concurrent.futures.Executor | None = None
        if workers > 1:
            ctx = multiprocessing.get_context("fork")
            self.executor = concurrent.futures.ProcessPoolExecutor(max_workers=workers, mp_context=ctx)

    def run(self, initial: Sequence[tuple[Callable, tuple]],
            on_done: Callable[[Any], list[tuple[Callable, tuple]]]) -> None:
        """Run ``initial`` tasks ``(fn, args)``; each result goes to ``on_done``, which may
        return further tasks (submitted at once, so no worker waits for a whole phase)."""
        if self.executor is None:
            queue = collections.deque(initial)
            while queue:
                fn, args = queue.popleft()
                queue.extend(on_done(fn(*args)))
            return
        pending = {self.executor.submit(fn, *args) for fn, args in initial}
        while pending:
            finished, pending = concurrent.futures.wait(pending, return_when=concurrent.futures.FIRST_COMPLETED)
            for f in finished:
                for fn, args in on_done(f.result()):
                    pending.add(self.executor.submit(fn, *args))

    def close(self) -> None:
        if self.executor is not None:
            self.executor.shutdown(wait=True, cancel_futures=True)


def run_mutation(
    products: Sequence[type[Product]],
    *,
    paths: int = DEFAULT_PATHS,
    quick_paths: int = QUICK_PATHS,
    equivalence_paths: int = EQUIVALENCE_PATHS,
    seed: int = DEFAULT_SEED,
    alpha: float = DEFAULT_ALPHA,
    workers: int | None = None,
    operators: Sequence[str] | None = None,
    method: str = "auto",
    progress: Callable[[int, int], None] | None = None,
) -> MutationReport:
    """Mutate each product's payoff code, run its checks on every mutant, and score.

    Parameters
    ----------
    products
        Product classes (``limitcase.loader.load_products``).
    paths
        Paths per check for the survivors of the first pass (and the original's own run).
    quick_paths
        Paths per check in the first pass.
    equivalence_paths
        Simulated paths per parameter point in the equivalence test.
    seed, alpha
        The run's seed and family-wise false-alarm rate (per product, Holm), as for
        ``limitcase check``: mutant and original share every random stream.
    workers
        Worker processes (default: the cores this process may use); 1 runs in this process.
    operators
        Operator names to apply (default: all of :data:`OPERATORS`).
    method
        Sampling method of the checks, as ``limitcase check --method`` (default ``"auto"``,
        the same as ``check``); the equivalence comparison always uses plain paths.
    progress
        Called with ``(done, total)`` as tasks finish.

    Returns
    -------
    MutationReport

    Notes
    -----
    A mutant is judged as ``limitcase check`` judges a product run on its own: Holm's
    correction over that product's checks, at ``alpha``. The unmutated products are judged
    as ``limitcase check`` judges the whole run: Holm over every check of every product
    (``false_alarms``); a case an original fails at its own per-product level cannot
    detect that product's mutants and is listed in ``settings["excluded_cases"]``.
    """
    for name, value, low in (("paths", paths, 2), ("quick_paths", quick_paths, 2),
                             ("equivalence_paths", equivalence_paths, 2)):
        if not isinstance(value, (int, np.integer)) or value < low:
            raise ParamError(f"{name}={value!r} must be an integer >= {low}; pass a path count such as 10000")
    if quick_paths > paths:
        raise ParamError(f"quick_paths={quick_paths!r} is above paths={paths!r}; the first pass must be the "
                         "cheaper one (lower quick_paths or raise paths)")
    if workers is None:
        from .suite import default_workers

        workers = default_workers()
    if not isinstance(workers, int) or workers < 1:
        raise ParamError(f"workers={workers!r} must be an integer >= 1")
    start = time.monotonic()
    cpu0 = time.process_time()
    mutants: list[Mutant] = []
    discarded: list[Discarded] = []
    for cls in products:
        ms, ds = make_mutants(cls, operators)
        mutants.extend(ms)
        discarded.extend(ds)
    product_list = list(products)
    from .sampling import METHODS

    if method not in METHODS:
        raise ParamError(f"method={method!r} is not a sampling method; choose from {', '.join(METHODS)}")
    settings = dict(paths=int(paths), quick_paths=int(quick_paths), equivalence_paths=int(equivalence_paths),
                    seed=int(seed), alpha=float(alpha), workers=workers, method=method,
                    operators=list(OPERATORS) if operators is None else list(operators))
    _REGISTRY.clear()
    _REGISTRY.update(products=product_list, mutants=mutants, settings=settings)
    index_of = {cls: i for i, cls in enumerate(product_list)}
    budgets = tuple(dict.fromkeys((quick_paths, paths)))
    by_product: dict[int, list[int]] = collections.defaultdict(list)
    for k, m in enumerate(mutants):
        by_product[index_of[m.original]].append(k)
    total = [len(budgets) * len(product_list) + len(mutants)]
    done = [0]
    baselines: dict[tuple[int, int], list[Outcome]] = {}
    cpu = {"making_mutants": time.process_time() - cpu0, "originals": 0.0, "equivalence": 0.0,
           "checks_first_pass": 0.0, "checks_full_budget": 0.0}
    first: dict[int, dict] = {}
    final: dict[int, dict] = {}
    waiting: dict[int, list[int]] = collections.defaultdict(list)  # survivors waiting for a full baseline

    def verdicts(i: int, budget: int) -> list[str]:
        return [o.verdict for o in baselines[(i, budget)]]

    def full_stage(k: int) -> tuple[Callable, tuple]:
        return _task_mutant, (k, "full", verdicts(index_of[mutants[k].original], paths))

    def on_done(res: Any) -> list[tuple[Callable, tuple]]:
        done[0] += 1
        new: list[tuple[Callable, tuple]] = []
        if isinstance(res, tuple):  # an original's run
            i, budget, outcomes, seconds = res
            baselines[(i, budget)] = outcomes
            cpu["originals"] += seconds
            if budget == quick_paths:
                new += [(_task_mutant, (k, "first", verdicts(i, quick_paths))) for k in by_product[i]]
            if budget == paths:
                new += [full_stage(k) for k in waiting.pop(i, [])]
        elif res["stage"] == "first":
            k = res["mid"]
            first[k] = res
            cpu["equivalence"] += res["cpu_equivalence"]
            cpu["checks_first_pass"] += res["cpu_checks"]
            if res["status"] == "survived" and paths > quick_paths:
                total[0] += 1
                i = index_of[mutants[k].original]
                if (i, paths) in baselines:
                    new.append(full_stage(k))
                else:
                    waiting[i].append(k)
        else:
            final[res["mid"]] = res
            cpu["equivalence"] += res["cpu_equivalence"]
            cpu["checks_full_budget"] += res["cpu_checks"]
        if progress is not None:
            progress(done[0], total[0])
        return new

    # the originals' first-pass runs go first: each one releases its product's mutants
    initial = [(_task_original, (i, b)) for b in budgets for i in range(len(product_list))]
    pool = _Pool(min(workers, max(1, len(mutants) + len(product_list))))
    try:
        pool.run(initial, on_done)
    finally:
        pool.close()
        _REGISTRY.clear()

    results: list[MutantResult] = []
    for k, m in enumerate(mutants):
        r = final.get(k, first[k])
        eq: Equivalence | None = r.get("equivalence", first[k].get("equivalence"))
        status = r["status"]
        suggestion = ""
        off: PointDifference | None = first[k].get("probe")
        if status == "survived":
            suggestion = suggest(m, eq, checks_for(m.original))
        elif status == "equivalent" and off is not None and off.differs:
            suggestion = suggest_hidden(m, off)
        mu = m.mutation
        results.append(MutantResult(
            id=m.id, product=m.original.__name__, module=m.original.__module__, family=family_of(m.original),
            operator=mu.operator, description=mu.description, function=mu.function, location=m.location,
            line=mu.line, diff=mu.diff, status=status, paths=r["paths"], detected_by=tuple(r["cases"]),
            message=r["message"], suggestion=suggestion,
            edge_only=bool(eq is not None and eq.edge_only and status == "survived"),
            params_involved=mu.params_involved, equivalence=eq.to_dict() if eq is not None else None,
            off_checks=_json_safe(asdict(off)) if off is not None else None,
        ))
    originals: dict[str, list[dict]] = {}
    run_wide = finalise([o for i in range(len(product_list)) for o in baselines[(i, paths)]], alpha)
    false_alarms: list[dict] = []
    for o in run_wide:
        if o.verdict != "pass":
            cls = next(c for c in product_list if c.__name__ == o.product)
            false_alarms.append({"product": o.product, "family": family_of(cls), "case": o.case,
                                 "verdict": o.verdict, "message": o.message, "paths": paths})
    excluded = []
    for cls, i in index_of.items():
        originals[cls.__name__] = [o.to_dict() for o in baselines[(i, paths)]]
        for budget in dict.fromkeys((quick_paths, paths)):
            for o in baselines[(i, budget)]:
                if o.verdict != "pass":
                    excluded.append({"product": cls.__name__, "case": o.case, "paths": budget,
                                     "verdict": o.verdict, "message": o.message})
    settings["excluded_cases"] = excluded
    settings["cpu_seconds"] = {k: round(v, 2) for k, v in cpu.items()}
    return MutationReport(
        results=results, discarded=discarded, originals=originals, false_alarms=false_alarms, settings=settings,
        runtime=time.monotonic() - start,
        products=[(c.__name__, c.__module__, family_of(c)) for c in product_list],
    )


# ----------------------------------------------------------------------------------------
# what check would catch a survivor


_BARRIER_WORDS = ("barrier", "knock", "level", "autocall", "protection")
_COUNT_WORDS = ("fixing", "monitoring", "exercise", "steps", "dates", "periods", "observations")


def _role(param: str) -> str:
    p = param.lower()
    if "rebate" in p:
        return "rebate"
    if any(w in p for w in _BARRIER_WORDS):
        return "barrier"
    if "strike" in p or "trigger" in p:
        return "strike"
    if any(w in p for w in _COUNT_WORDS):
        return "count"
    if "maturity" in p or "expiry" in p:
        return "maturity"
    return "other"


def _declared(cls: type[Product]) -> tuple[list[str], list[str]]:
    """Short descriptions of the declared reductions and relations."""
    reds = []
    for r in cls.reductions:
        moved = ", ".join(r.changes) if r.changes else "no parameter"
        reds.append(f"{r.name} ({moved})")
    rels = []
    for r in cls.relations:
        kind = type(r).__name__
        name = getattr(r, "name", "") or getattr(r, "param", "")
        rels.append(f"{name or kind} [{kind}]")
    return reds, rels


def _paths_needed(p: PointDifference, alpha: float, m: int) -> int | None:
    """Paths a two-sided check of the mutant against a trusted price at this point would
    need to see its mean shift with 90% power at the strictest Holm level over ``m``
    checks: ``n = ((z_{1-alpha/(2m)} + z_{0.9}) sd / |shift|)^2``, ``sd`` the standard
    deviation of the mutant's present value per path (the check's noise)."""
    if p.difference is None or p.price_sd is None or p.difference == 0:
        return None
    z = norm.isf(alpha / max(m, 1) / 2.0) + norm.isf(1.0 - POWER)
    return int(math.ceil((z * p.price_sd / abs(p.difference)) ** 2))


def suggest(mutant: Mutant, eq: Equivalence | None, checks: Sequence[Check] | None = None,
            alpha: float = DEFAULT_ALPHA) -> str:
    """What kind of check would catch a surviving mutant, from the mutation's nature and
    location and from where it changes the cash flows.

    The text has two parts: the evidence (at which parameter points of the checks the
    mutant pays differently, and by how much on average), and a recommendation keyed on
    the operator and the parameters the mutated expression reads (a barrier, a strike, a
    rebate, a count of dates).
    """
    mu = mutant.mutation
    cls = mutant.original
    involved = ", ".join(mu.params_involved) or "the payoff"
    reds, rels = _declared(cls)
    parts: list[str] = []

    if eq is not None:
        differ = [p for p in eq.points if p.differs]
        same = [p.point for p in eq.points if not p.differs]
        if eq.edge_only:
            n_random = max((p.random_paths for p in eq.points), default=0)
            parts.append(
                "It pays differently only on the deterministic edge paths (paths on or touching the levels "
                f"{involved} compares with), never on the {n_random:,} simulated paths of each check point: "
                "the difference needs a price exactly on a level (probability 0 under a continuous model) or "
                "an event too rare to move a price check."
            )
        elif differ:
            shown = []
            for p in differ[:3]:
                if p.difference is not None and p.stderr is not None:
                    rel = f", {abs(p.difference) / abs(p.reference_price):.2%} of the price" \
                        if p.reference_price else ""
                    shown.append(f"{p.point}: mean change {p.difference:+.4g} +/- {p.stderr:.2g}{rel}, "
                                 f"{p.random_violations} of {p.random_paths} paths differ")
                elif p.note:
                    shown.append(f"{p.point}: {p.note}")
                else:
                    shown.append(f"{p.point}: {p.edge_differences} of {p.edge_paths} edge paths differ")
            parts.append("It changes the cash flows at " + "; ".join(shown) + ".")
            if same:
                parts.append("It pays exactly the original at " + "; ".join(same[:4])
                             + (" ..." if len(same) > 4 else "")
                             + ": those checks cannot see it.")
            best = max((p for p in differ if p.difference is not None and p.stderr),
                       key=lambda p: abs(p.difference) / p.stderr, default=None)  # type: ignore[operator]
            if best is not None:
                need = _paths_needed(best, alpha, max(len(checks or ()), 1))
                if need is not None:
                    parts.append(f"A check of it against a trusted price at {best.point} would see the shift "
                                 f"with {POWER:.0%} power from about {max(need, 2):,} paths.")

    rec = _recommendation(mutant, eq)
    declared = f"Declared: reductions {', '.join(reds) or 'none'}; relations {', '.join(rels) or 'none'}."
    return " ".join(parts + [rec, declared])


_BARRIER_ADVICE = (
    "Add a path-by-path Identity in + out = vanilla with the matching knock-in (or knock-out), a pathwise "
    "Monotone in the barrier, and a reduction where the barrier is touched: the barrier at the spot "
    "(knocked today), or a closed form with the barrier near the spot (continuous monitoring: "
    "Reiner-Rubinstein)."
)


def _recommendation(mutant: Mutant, eq: Equivalence | None) -> str:
    """The kind of check that would catch a surviving mutant, from the operator, the
    function it is in and the roles of the parameters the mutated expression reads."""
    mu = mutant.mutation
    cls = mutant.original
    op = mu.operator
    roles = {_role(p) for p in mu.params_involved}
    counts = [p for p in cls.param_specs() if _role(p) == "count"]
    count = counts[0] if counts else None
    one_date = count is not None and any(
        count in r.changes and not callable(r.changes[count]) and r.changes[count] == 1 for r in cls.reductions
    )
    in_dates = mu.function.rsplit(".", 1)[-1] in ("dates", "exercise_dates")
    if eq is not None and eq.edge_only and op == "compare_strict":
        lvl = next((p for p in mu.params_involved if _role(p) in ("barrier", "strike")), None)
        where = f"{lvl} set to the spot" if lvl else "the compared level set to the spot"
        return (
            "To pin it, add a reduction under a zero-volatility model (model_changes vol=0 and dividend = rate, "
            f"so the price stays at the spot on every date) with {where}: the path then sits exactly on the "
            "level and the contract's strict or non-strict inequality decides the cash flow, against a bond or "
            "the intrinsic value. Or state in the docstring that equality is immaterial under continuous models."
        )
    if in_dates:
        moved = [p.point for p in (eq.points if eq is not None else ()) if "dates differ" in p.note]
        at = f" (they differ at {', '.join(moved[:3])})" if moved else ""
        return (
            f"The schedule is wrong{at}, but no check there depends on when the dates fall (both sides of the "
            "check vanish or ignore the dates). Add a check whose target depends on every date at those "
            "parameters: the product's closed form there, or a path-by-path Identity with a product built on "
            "the intended schedule."
        )
    if op == "strike_spot":
        return (
            "Strike and today's spot are confused: the checks that could see it price the product with the "
            "strike at the spot. Add a check against a trusted price with the strike away from the spot "
            "(own_closed_form with the strike moved, e.g. 10% out of the money), or a path-by-path parity "
            "Identity at such a strike."
        )
    if op == "at_maturity":
        if any(f"`{w}`" in mu.description for w in ("max", "min", "amax", "amin", "nanmax", "nanmin")):
            return (
                "The extreme over the dates is read at the last date only, and the checks cannot tell: a "
                "reduction to one date makes both the same, and bounds such as 'at least the at-the-money "
                "call' hold with equality. Add a path-by-path Identity with another product reading the same "
                "extreme (e.g. floating lookback call = fixed-strike lookback put at K = S0 + forward at S0), "
                f"or a trusted price at several dates{f' ({count} > 1)' if count else ''}."
            )
        return "The barrier is tested on the last date only. " + _BARRIER_ADVICE
    if "rebate" in roles or op == "rebate":
        return (
            "Add a check where the rebate is paid: a reduction with the barrier at the spot (knocked at once: "
            "the rebate alone, a bond paying R), or an Identity in + out = vanilla + R at T with rebates."
        )
    if "barrier" in roles:
        return "The barrier test is not exercised where it matters. " + _BARRIER_ADVICE
    if op == "discount":
        return (
            "Add a check whose target carries the discounting: the product's own closed form at a non-zero "
            "rate and maturity (own_closed_form), or a Bound against a discounted amount."
        )
    if op in ("fixing", "axis", "index_shift") or "count" in roles:
        if count is not None and not one_date:
            return (
                f"Which dates are read is not seen. Add a reduction to a single date ({count} = 1), where the "
                "one date is the only one, so a date left out or shifted changes every cash flow, against what "
                "the product becomes on one date (e.g. a knock-in monitored only at T is a gap option triggered "
                "at the barrier, path by path)."
            )
        return (
            "Which dates are read is not seen: a reduction to one date cannot tell fixings apart. Add a check "
            f"with several dates{f' ({count} > 1)' if count else ''} that depends on each of them: a closed form "
            "there (e.g. the geometric average: Kemna-Vorst), or a path-by-path Identity with a product on the "
            "same schedule (e.g. call - put = forward on the same average)."
        )
    if "strike" in roles or op in ("call_put", "sign", "max_min", "compare_side"):
        return (
            "Add a check at the default strike against a trusted price (own_closed_form), or a path-by-path "
            "parity Identity (call - put = forward) and a pathwise Monotone/Convex in the strike; reductions that "
            "move the strike to 0 or infinity make the strike term vanish."
        )
    if op == "compare_strict":
        return "Add a check where the compared quantities can be equal with positive probability."
    return ("Add a check at the default parameters against a trusted price (own_closed_form), or an Identity "
            "with a product that shares the mutated code's role.")


def suggest_hidden(mutant: Mutant, off: PointDifference) -> str:
    """For a mutant equivalent at every check point but not off them: where it differs, and
    which check would see it (the operator's recommendation)."""
    mu = mutant.mutation
    involved = ", ".join(mu.params_involved) or "the payoff"
    if off.random_violations:
        change = (f": mean change {off.difference:+.4g} +/- {off.stderr:.2g}, {off.random_violations} of "
                  f"{off.random_paths} simulated paths differ" if off.difference is not None else "")
    elif off.note:
        change = f": {off.note}"
    else:
        change = f": {off.edge_differences} of {off.edge_paths} edge paths differ (no simulated path)"
    return (f"Equivalent at every check point, but it pays differently at {off.point}{change}. The checks only "
            f"use points where this change to the code reading {involved} is invisible. "
            + _recommendation(mutant, None))


# ----------------------------------------------------------------------------------------
# scores for other reports (the dossier)


def product_scores(report: MutationReport) -> dict[str, ProductScore]:
    """Each product's score in a report, by product name, in run order."""
    out: dict[str, ProductScore] = {}
    alarms = {a["product"] for a in report.false_alarms}
    for name, module, fam in report.products:
        rs = [r for r in report.results if r.product == name and r.module == module]
        c = report.counts(rs)
        out[name] = ProductScore(
            name, module, fam, c["total"], c["caught"], c["error"], c["survived"], c["equivalent"],
            sum(1 for d in report.discarded if d.product == name),
            score_of(c["caught"], c["error"], c["survived"]), name in alarms,
        )
    return out


def scores_from_json(path: str | Path) -> dict[str, ProductScore]:
    """Per-product scores from a file written by ``limitcase mutate --json`` (a mutation run
    takes minutes, so a report can read the last one rather than rerun it)."""
    try:
        doc = json.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise InputError(f"{path}: cannot read a mutation report: {exc}") from exc
    if not isinstance(doc, dict) or doc.get("command") != "mutate" or "products" not in doc:
        raise InputError(f"{path}: not a 'limitcase mutate --json' file (no 'command': 'mutate' and 'products')")
    fields = set(ProductScore.__dataclass_fields__)
    return {d["product"]: ProductScore(**{k: v for k, v in d.items() if k in fields}) for d in doc["products"]}


def mutation_scores(products: Sequence[type[Product]], **kwargs: Any) -> dict[str, ProductScore]:
    """Run the mutation analysis on ``products`` (keywords as :func:`run_mutation`) and
    return each product's score, by product name."""
    return product_scores(run_mutation(products, **kwargs))
