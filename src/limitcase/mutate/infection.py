"""Mutants whose changed expression gives what the original's gives, at every evaluation: the
comparison's result is the original's against itself, computed once per point and reused.

Part of :mod:`limitcase.mutate` (the package docstring describes the method).

Why. After the dead-code reuse (:mod:`limitcase.mutate.dead`), most of the equivalence
phase is spent on mutants whose changed expression runs but cannot change its value where
the checks look: ``<`` for ``<=`` on prices that never tie, a bound of a series that is
never reached, ``max`` for ``min`` of two equal things. Each was priced at every point of its
product's checks on simulated paths, the same paths and the same original each time.

The argument (weak mutation, W. E. Howden, "Weak mutation testing and completeness of test
sets", IEEE Transactions on Software Engineering SE-8(4), 371-379, 1982). A mutant differs from its
original in one expression. Run the original once per point with every mutable expression
of its payoff code wrapped in a probe that evaluates the expression, then each of its
mutated forms in the same frame, and hands on the original's value. If at every evaluation
a mutated form gives the same value, the mutant's run on those paths is the original's,
step by step, and pays the same amounts bit for bit; its comparison's result is the
original's against itself.

"The same value" is strict, so that the rest of the run cannot tell the two apart: the same
object; or equal immutable scalars of one type (the sign of a zero counted); or two arrays
of one dtype, shape and strides, equal bit for bit, each owning its memory and referenced by
nothing but the probe (a fresh result, so no later write through another name can part
them). A mutated form that raises, or gives anything else, marks its mutant as changed.

Evaluating a mutated form must not disturb the original's run, so a probe is placed only
where the mutated forms call nothing but side-effect-free functions (numpy's and ``math``'s
functions, a fixed set of builtins and array methods; no ``out=``), assign nothing, and do
not use ``super``. The probed run's comparison must also give exactly what the plain twin's
gave; if it does not (a probe disturbed something), nothing is reused for that class.
"""

from __future__ import annotations

import ast
import copy
import math
import sys
import warnings
from typing import Any, Callable

import numpy as np

from ..product import Product
from .mutants import (Scoped, build_class, function_variants, payoff_scope, preorder, scope_contexts,
                      strip_function)

__all__ = ["ProbedClass", "probed_class", "same_value"]

_PROBE = "__limitcase_probe__"

_NUMPY = frozenset({
    "abs", "absolute", "all", "allclose", "amax", "amin", "any", "arange", "argmax", "argmin", "argsort", "around",
    "array", "array_equal", "asarray", "atleast_1d", "atleast_2d", "broadcast_arrays", "broadcast_to", "ceil",
    "clip", "column_stack", "concatenate", "copysign", "cos", "count_nonzero", "cumprod", "cumsum", "diff",
    "divide", "dot", "einsum", "exp", "exp2", "expand_dims", "expm1", "flatnonzero", "flip", "floor", "fmax",
    "fmin", "full", "full_like", "heaviside", "hstack", "hypot", "inner", "interp", "isclose", "isfinite", "isinf",
    "isnan", "isneginf", "isposinf", "linspace", "log", "log10", "log1p", "log2", "logical_and", "logical_not",
    "logical_or", "logical_xor", "matmul", "max", "maximum", "mean", "median", "min", "minimum", "mod",
    "multiply", "nan_to_num", "nanmax", "nanmean", "nanmin", "nansum", "negative", "nonzero", "ones",
    "ones_like", "outer", "power", "prod", "quantile", "percentile", "ravel", "repeat", "reshape", "roll",
    "round", "searchsorted", "sign", "signbit", "sin", "sort", "sqrt", "square", "squeeze", "stack", "std",
    "subtract", "add", "sum", "take", "take_along_axis", "tanh", "tile", "transpose", "trapezoid", "tril",
    "triu", "var", "vstack", "where", "zeros", "zeros_like", "float64", "int64", "bool_", "isscalar", "ndim",
    "shape", "size", "unique", "cumulative_sum", "cumulative_prod", "less", "less_equal", "greater",
    "greater_equal", "equal", "not_equal", "true_divide", "floor_divide", "rint", "trunc", "fabs",
})
"""numpy functions a probed expression may call (none writes to its arguments without ``out=``)."""

_UFUNC_METHODS = frozenset({"accumulate", "reduce", "outer", "reduceat"})
_BUILTINS = frozenset({"abs", "min", "max", "float", "int", "bool", "len", "range", "round", "sum", "any", "all",
                       "isinstance", "divmod", "pow", "complex"})
_ARRAY_METHODS = frozenset({
    "sum", "prod", "max", "min", "mean", "any", "all", "cumsum", "cumprod", "copy", "reshape", "astype", "clip",
    "ravel", "flatten", "transpose", "argmax", "argmin", "std", "var", "round", "squeeze", "take", "repeat",
    "nonzero", "item", "tolist", "swapaxes", "dot",
})
_FORBIDDEN = (ast.NamedExpr, ast.Yield, ast.YieldFrom, ast.Await, ast.Lambda, ast.Starred, ast.Slice,
              ast.GeneratorExp, ast.ListComp, ast.SetComp, ast.DictComp)


def _pure_call(call: ast.Call) -> bool:
    if any(k.arg == "out" or k.arg is None for k in call.keywords):
        return False
    f = call.func
    if isinstance(f, ast.Name):
        return f.id in _BUILTINS
    if isinstance(f, ast.Attribute):
        base = f.value
        if isinstance(base, ast.Name) and base.id in ("np", "numpy"):
            return f.attr in _NUMPY
        if isinstance(base, ast.Name) and base.id == "math":
            return True
        if (isinstance(base, ast.Attribute) and isinstance(base.value, ast.Name) and base.value.id in ("np", "numpy")
                and base.attr in _NUMPY and f.attr in _UFUNC_METHODS):
            return True
        return f.attr in _ARRAY_METHODS
    return False


def _probe_safe(node: ast.AST) -> bool:
    """Whether evaluating ``node`` a second time cannot disturb the run (see the module)."""
    for sub in ast.walk(node):
        if isinstance(sub, _FORBIDDEN) and sub is not node:
            # a slice or a starred item is fine inside a subscript or a call; the rest never
            if not isinstance(sub, (ast.Slice, ast.Starred)):
                return False
        if isinstance(sub, ast.Call) and not _pure_call(sub):
            return False
        if isinstance(sub, ast.Name) and sub.id in ("super", "__class__"):
            return False
        if isinstance(sub, (ast.Name, ast.Attribute, ast.Subscript)) and not isinstance(sub.ctx, ast.Load):
            return False
    return isinstance(node, ast.expr) and not isinstance(node, _FORBIDDEN)


def _parents(root: ast.AST) -> dict[int, tuple[ast.AST, str, int | None]]:
    return {id(node): (parent, fld, idx) for node, parent, fld, idx in preorder(root) if parent is not None}


def _replaced(parent: ast.AST, fld: str, idx: int | None, new: ast.AST) -> ast.AST:
    """A deep copy of ``parent`` with its child at ``fld[idx]`` replaced by ``new``."""
    value = getattr(parent, fld)
    held = value[idx] if idx is not None else value
    if idx is not None:
        value[idx] = new
    else:
        setattr(parent, fld, new)
    try:
        return copy.deepcopy(parent)
    finally:
        if idx is not None:
            value[idx] = held
        else:
            setattr(parent, fld, held)


def _lift(node: ast.AST, new: ast.AST, parents: dict) -> tuple[ast.AST, ast.AST] | None:
    """The smallest expression holding the mutated ``node`` that can stand alone in a
    lambda and whose value a mutation could leave unchanged, with its mutated form: a
    keyword, a slice or a tuple of slices lifts to its call or subscript, a called function
    to the call."""
    while True:
        up = parents.get(id(node))
        if up is None:
            return None
        parent, fld, idx = up
        lift = (isinstance(node, (ast.keyword, ast.Slice, ast.Starred))
                or (isinstance(parent, ast.Call) and fld == "func")
                or (isinstance(node, ast.Tuple) and any(isinstance(e, ast.Slice) for e in node.elts)))
        if not lift:
            return node, new
        new = _replaced(parent, fld, idx, new)
        node = parent


def same_value(v: Any, w: Any, fresh: Callable[[Any], bool]) -> bool:
    """Whether a mutated form's value ``w`` cannot be told apart from the original's ``v``
    by the rest of the run (see the module); ``fresh(a)``: ``a`` owns its memory and nothing
    but the probe refers to it."""
    if v is w:
        return True
    t = type(v)
    if t is not type(w):
        return False
    if t in (bool, int, str, bytes, range, type(None)):
        return bool(v == w)
    if t is float:
        return (v == w and math.copysign(1.0, v) == math.copysign(1.0, w)) or (v != v and w != w)
    if t is complex:
        return same_value(v.real, w.real, fresh) and same_value(v.imag, w.imag, fresh)
    if isinstance(v, np.generic):
        return v.dtype == w.dtype and v.tobytes() == w.tobytes()
    if t is tuple:
        return len(v) == len(w) and all(
            type(a) is not np.ndarray and same_value(a, b, fresh) for a, b in zip(v, w))
    if t is np.ndarray:
        if v.dtype != w.dtype or v.dtype.hasobject or v.shape != w.shape or v.strides != w.strides:
            return False
        if not (fresh(v) and fresh(w)):
            return False
        if v.flags.c_contiguous and w.flags.c_contiguous:
            return bool(np.array_equal(v.reshape(-1).view(np.uint8), w.reshape(-1).view(np.uint8)))
        return v.tobytes(order="A") == w.tobytes(order="A")
    return False


class ProbedClass:
    """A twin of a product class whose payoff code carries probes at every mutable
    expression it can probe; :attr:`changed` collects the mutated forms (by ``(function,
    mutated function's source)``) that gave another value since :meth:`reset`."""

    def __init__(self, cls: type[Product]) -> None:
        self.keys: list[tuple[str, str]] = []
        self.changed: set[int] = set()
        self.cls = self._build(cls)
        self.index = {k: i for i, k in enumerate(self.keys)}

    def reset(self) -> None:
        self.changed.clear()

    def probed(self, key: tuple[str, str]) -> bool:
        """Whether the mutated form ``key`` has a probe."""
        return key in self.index

    def unchanged(self, key: tuple[str, str], changed: frozenset[int]) -> bool:
        """Whether ``key`` has a probe and it never saw another value (``changed``: a snapshot)."""
        i = self.index.get(key)
        return i is not None and i not in changed

    def _probe(self, original: Callable[[], Any], forms: tuple) -> Any:
        v = original()
        changed = self.changed
        for i, form in forms:
            if i in changed:
                continue
            try:
                w = form()
            except Exception:
                changed.add(i)
                continue
            if not same_value(v, w, _fresh):
                changed.add(i)
            del w
        return v

    def _instrument(self, entry: Scoped, ctx: Any) -> str | None:
        work = strip_function(entry.node)
        parents = _parents(work)
        sites: dict[int, tuple[ast.AST, list[tuple[int, ast.AST]]]] = {}
        for _, node, new, _, text in function_variants(work, ctx):
            lifted = _lift(node, new, parents)
            if lifted is None:
                continue
            target, form = lifted
            if not (_probe_safe(target) and _probe_safe(form)):
                continue
            self.keys.append((entry.qualname, text))
            sites.setdefault(id(target), (target, []))[1].append((len(self.keys) - 1, form))
        if not sites:
            return None

        def empty_args() -> ast.arguments:
            return ast.arguments(posonlyargs=[], args=[], vararg=None, kwonlyargs=[], kw_defaults=[], kwarg=None,
                                 defaults=[])

        class Wrap(ast.NodeTransformer):
            def generic_visit(self, node: ast.AST) -> ast.AST:
                site = sites.get(id(node))
                node = super().generic_visit(node)
                if site is None:
                    return node
                forms = ast.Tuple(elts=[ast.Tuple(elts=[ast.Constant(i), ast.Lambda(empty_args(), f)], ctx=ast.Load())
                                        for i, f in site[1]], ctx=ast.Load())
                return ast.Call(ast.Name(_PROBE, ast.Load()), [ast.Lambda(empty_args(), node), forms], [])

        out = Wrap().visit(work)
        ast.fix_missing_locations(out)
        return ast.unparse(out)

    def _build(self, cls: type[Product]) -> type[Product]:
        scope = payoff_scope(cls)
        contexts = scope_contexts(cls, scope)
        sources = {}
        for e in scope:
            text = self._instrument(e, contexts[e.qualname])
            if text is not None:
                sources[e.qualname] = text
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return build_class(cls, scope, sources, "probes", extra={_PROBE: self._probe})


def _fresh_refs() -> int:
    """References a fresh array has inside the predicate :func:`same_value` calls from
    :meth:`ProbedClass._probe` (a name, same_value's parameter, the predicate's, getrefcount's
    argument): measured, so that another interpreter version's counting is followed."""
    seen: list[int] = []

    def count(a: Any) -> bool:
        seen.append(sys.getrefcount(a))
        return True

    v = np.zeros(3)
    w = np.zeros(3)
    same_value(v, w, count)
    return max(seen)


_FRESH_REFS = _fresh_refs()


def _fresh(a: np.ndarray) -> bool:
    """``a`` owns its memory and nothing but the probe refers to it."""
    return a.base is None and sys.getrefcount(a) <= _FRESH_REFS


_BUILT: dict[type, ProbedClass | None] = {}


def probed_class(cls: type[Product]) -> ProbedClass | None:
    """The probed twin of ``cls`` (built once per process), or ``None`` when it cannot be
    built (its payoff code cannot be parsed or the probes do not compile)."""
    if cls not in _BUILT:
        try:
            _BUILT[cls] = ProbedClass(cls)
        except Exception:
            _BUILT[cls] = None
    return _BUILT[cls]
