"""Mutation operators: small, realistic slips applied to one node of a payoff's syntax tree.

Part of :mod:`limitcase.mutate` (the package docstring describes the method).
"""

from __future__ import annotations

import ast
import copy
from dataclasses import dataclass
from typing import Callable, Iterable

import numpy as np

from ..product import Observed

__all__ = ["OPERATORS", "Context", "Operator", "is_self_attr"]

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


def is_self_attr(node: ast.AST, ctx: Context, names: Iterable[str] | None = None) -> bool:
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
    if isinstance(node, ast.Attribute) and node.attr in _MAX_MIN and not is_self_attr(node, ctx):
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
    if is_self_attr(node, ctx, ctx.strike_params) and isinstance(node.ctx, ast.Load):
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
