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

Finer: a statement that runs may hold an expression it never evaluates (the put arm of
``max(s - K, 0) if self.call else max(K - s, 0)`` on a call). The traced run also records
the source position of every bytecode instruction of the module that executes
(:meth:`types.CodeType.co_positions`). A mutant changes one expression; if no executed
instruction lies inside the widest expression starting where the mutation starts (the
mutated node, or one holding it: the safe side), and no executed constant load covers it
(the compiler folds ``(1, 2)`` or ``2 ** 10`` into one constant positioned at the whole), the
original never evaluated it, so the mutant never does either: the same reuse applies.
"""

from __future__ import annotations

import ast
import dis
import hashlib
import os
import pickle
import sys
from typing import Any, Callable

from ..models.base import Model
from ..product import Product

__all__ = ["mutated_lines", "mutated_span", "reuse_or_compare", "traced", "traced_spans"]

_STATEMENTS: dict[str, list[tuple[int, int, int, bool]]] = {}
"""Per module file: ``(first line, last line, header end, defines)`` of every statement."""

_RESULTS: dict[tuple, tuple[Any, frozenset[int], frozenset[tuple[int, int, int, int, bool]]]] = {}
"""Per comparison: its result with the original in the mutant's place, the lines of the
module file that executed during it and the positions of its instructions that did (this
process only)."""

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
    out, lines, _ = traced_spans(file, fn)
    return out, lines


def traced_spans(file: str, fn: Callable[[], Any]
                 ) -> tuple[Any, frozenset[int], frozenset[tuple[int, int, int, int, bool]]]:
    """``fn()``, the lines of ``file`` that executed during it and, per bytecode instruction
    of ``file`` that executed, its source position ``(line, end line, column, end column)``
    (:meth:`types.CodeType.co_positions`) and whether it loads a constant (this thread)."""
    target = _real(file)
    seen: dict[str, bool] = {}
    lines: set[int] = set()
    done: set[tuple[Any, int]] = set()

    def local(frame: Any, event: str, arg: Any) -> Any:
        if event == "opcode":
            done.add((frame.f_code, frame.f_lasti))
        elif event == "line":
            lines.add(frame.f_lineno)
        return local

    def calls(frame: Any, event: str, arg: Any) -> Any:
        name = frame.f_code.co_filename
        mine = seen.get(name)
        if mine is None:
            mine = seen[name] = _real(name) == target
        if mine:
            lines.add(frame.f_lineno)
            frame.f_trace_opcodes = True
            return local
        return None

    previous = sys.gettrace()
    sys.settrace(calls)
    try:
        out = fn()
    finally:
        sys.settrace(previous)
    spans: set[tuple[int, int, int, int, bool]] = set()
    table: dict[Any, list] = {}
    for code, offset in done:
        pos = table.get(code)
        if pos is None:
            pos = table[code] = list(code.co_positions())
        i = offset // 2  # one position per 2-byte code unit
        if 0 <= i < len(pos) and None not in pos[i]:
            spans.add((*pos[i], code.co_code[offset] == _LOAD_CONST))
    return out, frozenset(lines), frozenset(spans)


def mutated_span(file: str, line: int, col: int) -> tuple[int, int, int, int] | None:
    """``(line, end line, column, end column)`` of the widest expression of ``file``
    starting at ``(line, col)`` (the mutated node or one holding it: the safe side), or
    ``None`` when no expression starts there."""
    try:
        return _spans(file).get((line, col))
    except (OSError, SyntaxError, ValueError):
        return None


_SPANS: dict[str, dict[tuple[int, int], tuple[int, int, int, int]]] = {}
"""Per module file: the widest expression starting at each ``(line, column)``."""


def _spans(file: str) -> dict[tuple[int, int], tuple[int, int, int, int]]:
    found = _SPANS.get(file)
    if found is None:
        with open(file, encoding="utf-8") as f:
            tree = ast.parse(f.read())
        found = {}
        for node in ast.walk(tree):
            if isinstance(node, ast.expr) and node.end_lineno is not None:
                span = (node.lineno, node.end_lineno, node.col_offset, node.end_col_offset or 0)
                best = found.get((node.lineno, node.col_offset))
                if best is None or (span[1], span[3]) > (best[1], best[3]):
                    found[(node.lineno, node.col_offset)] = span
        _SPANS[file] = found
    return found


_LOAD_CONST = dis.opmap["LOAD_CONST"]


def _inside(pos: tuple, span: tuple[int, int, int, int]) -> bool:
    return (pos[0], pos[2]) >= (span[0], span[2]) and (pos[1], pos[3]) <= (span[1], span[3])


def _evaluated(spans: frozenset, span: tuple[int, int, int, int]) -> bool:
    """Whether the expression at ``span`` was evaluated: an executed instruction lies inside
    it, or an executed constant load covers it (the compiler folds constant expressions,
    ``(1, 2)`` or ``2 ** 10``, into one constant positioned at the whole expression)."""
    for pos in spans:
        if _inside(pos, span):
            return True
        if pos[4] and (pos[0], pos[2]) <= (span[1], span[3]) and (span[0], span[2]) <= (pos[1], pos[3]):
            return True
    return False


def reuse_or_compare(compare: Callable[..., Any], original: Product, mutant: Product, model: Model, paths: int,
                     seed: int, key: int, site: tuple[str, int] | tuple[str, int, int] | None,
                     variant: tuple[str, str] | None = None) -> Any:
    """``compare(original, mutant, model, paths, seed, key)``, or, when the mutation at
    ``site`` (``(module file, line[, column])``) is in a statement the original does not
    execute on these paths, or in an expression it never evaluates there (with the column:
    no executed instruction lies inside the widest expression starting at it, and no
    executed constant load covers it), the result of ``compare`` with a copy of the original
    in the mutant's place (computed once per point in this process). With ``variant``
    (``(function's qualified name, mutated function's source)``, as the mutation has them),
    also when the mutated expression runs but gives, at every evaluation, what the
    original's gives (:mod:`limitcase.mutate.infection`)."""
    stmt = mutated_lines(site[0], site[1]) if site is not None else None
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
        hit = traced_spans(site[0], lambda: compare(original, twin, model, paths, seed, key))
        if len(_RESULTS) >= MOST_KEPT:
            _RESULTS.clear()
        _RESULTS[ck] = hit
    result, ran, spans = hit
    if not any(line in ran for line in stmt):
        return result
    # the statement ran; the mutated expression may still never have been evaluated (the arm
    # of a conditional expression not taken, the right side of a short-circuit): no
    # instruction positioned inside it executed
    span = mutated_span(site[0], site[1], site[2]) if len(site) > 2 else None
    if span is not None and not _evaluated(spans, span):
        return result
    if variant is not None:
        from .infection import probed_class

        probed = probed_class(type(original))
        if probed is not None and probed.probed(variant):
            changed = _changed(ck, probed, compare, original, model, paths, seed, key, result)
            if changed is not None and probed.unchanged(variant, changed):
                return result
    return compare(original, mutant, model, paths, seed, key)


_CHANGED: dict[tuple, frozenset[int] | None] = {}
"""Per comparison: the mutated forms the probes saw change, or ``None`` when the probed run
did not give exactly the plain twin's result (this process only)."""


def _changed(ck: tuple, probed: Any, compare: Callable[..., Any], original: Product, model: Model, paths: int,
             seed: int, key: int, result: Any) -> frozenset[int] | None:
    """The probed run of a comparison (:mod:`limitcase.mutate.infection`), once per point."""
    if ck in _CHANGED:
        return _CHANGED[ck]
    probed.reset()
    try:
        again = compare(original, probed.cls(**original.params()), model, paths, seed, key)
    except Exception:
        again = None
    # the probes hand on the original's values: the same result to the last bit, or a probe
    # disturbed the run and nothing is reused
    found = frozenset(probed.changed) if again is not None and repr(again) == repr(result) else None
    if len(_CHANGED) >= MOST_KEPT:
        _CHANGED.clear()
    _CHANGED[ck] = found
    return found
