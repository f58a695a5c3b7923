"""Mutants in code the original never runs on a comparison's paths: the comparison's result
is the original's against itself, computed once per point and reused.

Part of :mod:`limitcase.mutate` (the package docstring describes the method).

Why. About three mutants in ten of the catalogue are equivalent, most because the statement
they change is never reached at the points the checks use (the up-barrier branch of a
down-and-out, the branch of a flag the checks never set). The equivalence test priced each of
them against the original on simulated paths at every point, the same paths and the same
original each time.

The argument. A mutant differs from its original in one statement of one function. Run the
comparison once with the original in the mutant's place (the same point, model, streams and
path count), recording which lines of the product's module execute. If no line of the
mutated statement executed, the mutant, given the same inputs, runs the same code on the
same numbers up to the end and pays the same amounts bit for bit: the comparison's result is
that run's. A statement that defines a function or a class (a default argument is evaluated
when the module is imported, not while pricing) is never judged this way.
"""

from __future__ import annotations

import ast
import hashlib
import os
import pickle
import sys
from typing import Any, Callable

from ..models.base import Model
from ..product import Product

__all__ = ["mutated_lines", "reuse_or_compare", "traced"]

_STATEMENTS: dict[str, list[tuple[int, int, int, bool]]] = {}
"""Per module file: ``(first line, last line, header end, defines)`` of every statement."""

_RESULTS: dict[tuple, tuple[Any, frozenset[int]]] = {}
"""Per comparison: its result with the original in the mutant's place, and the lines of the
module file that executed during it (this process only)."""

MOST_KEPT = 4096
"""Comparisons remembered at once (small tuples; the cache is emptied past this)."""


def _statements(file: str) -> list[tuple[int, int, int, bool]]:
    found = _STATEMENTS.get(file)
    if found is None:
        with open(file, encoding="utf-8") as f:
            tree = ast.parse(f.read())
        found = []
        for node in ast.walk(tree):
            if isinstance(node, ast.stmt):
                end = node.end_lineno or node.lineno
                body = getattr(node, "body", None)
                header = (body[0].lineno - 1) if isinstance(body, list) and body and isinstance(body[0], ast.AST) \
                    else end
                defines = isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef))
                found.append((node.lineno, end, max(node.lineno, header), defines))
        _STATEMENTS[file] = found
    return found


def mutated_lines(file: str, line: int) -> range | None:
    """The lines of the innermost statement of ``file`` holding ``line`` (of a compound
    statement, its header: ``if x > 0:`` without its body); ``None`` when that statement
    defines a function or class, or the file cannot be read."""
    try:
        stmts = _statements(file)
    except (OSError, SyntaxError, ValueError):
        return None
    holding = [s for s in stmts if s[0] <= line <= s[1]]
    if not holding:
        return None
    first, last, header, defines = min(holding, key=lambda s: (s[1] - s[0], -s[0]))
    if defines:
        return None
    end = header if line <= header else last
    return range(first, end + 1)


def _real(path: str) -> str:
    return os.path.realpath(path)


def traced(file: str, fn: Callable[[], Any]) -> tuple[Any, frozenset[int]]:
    """``fn()`` and the lines of ``file`` that executed during it (this thread)."""
    target = _real(file)
    seen: dict[str, bool] = {}
    lines: set[int] = set()

    def local(frame: Any, event: str, arg: Any) -> Any:
        if event == "line":
            lines.add(frame.f_lineno)
        return local

    def calls(frame: Any, event: str, arg: Any) -> Any:
        name = frame.f_code.co_filename
        mine = seen.get(name)
        if mine is None:
            mine = seen[name] = _real(name) == target
        if mine:
            lines.add(frame.f_lineno)
            return local
        return None

    previous = sys.gettrace()
    sys.settrace(calls)
    try:
        out = fn()
    finally:
        sys.settrace(previous)
    return out, frozenset(lines)


def reuse_or_compare(compare: Callable[..., Any], original: Product, mutant: Product, model: Model, paths: int,
                     seed: int, key: int, site: tuple[str, int] | None) -> Any:
    """``compare(original, mutant, model, paths, seed, key)``, or, when the mutation at
    ``site`` (``(module file, line)``) is in a statement the original does not execute on
    these paths, the result of ``compare`` with a copy of the original in the mutant's place
    (computed once per point in this process)."""
    stmt = mutated_lines(*site) if site is not None else None
    if stmt is None:
        return compare(original, mutant, model, paths, seed, key)
    try:  # the model's whole state: a label or repr may abbreviate (a correlation matrix, a surface)
        state = hashlib.sha256(pickle.dumps((type(model), model), protocol=pickle.HIGHEST_PROTOCOL)).hexdigest()
    except Exception:  # a model that cannot be pickled: no reuse
        return compare(original, mutant, model, paths, seed, key)
    ck = (type(original), repr(sorted(original.params().items())), state, int(paths), repr(seed), int(key),
          _real(site[0]))
    hit = _RESULTS.get(ck)
    if hit is None:
        twin = type(original)(**original.params())
        hit = traced(site[0], lambda: compare(original, twin, model, paths, seed, key))
        if len(_RESULTS) >= MOST_KEPT:
            _RESULTS.clear()
        _RESULTS[ck] = hit
    result, ran = hit
    if any(line in ran for line in stmt):
        return compare(original, mutant, model, paths, seed, key)
    return result
