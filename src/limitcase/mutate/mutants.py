"""Mutants: the in-scope functions of a product, their mutations, and compiled mutant classes.

Part of :mod:`limitcase.mutate` (the package docstring describes the method).
"""

from __future__ import annotations

import ast
import copy
import difflib
import inspect
import os
import sys
import textwrap
import types
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterator, Sequence

from ..errors import InputError
from ..product import Product
from .operators import Context, OPERATORS, is_self_attr

__all__ = [
    "Discarded",
    "Mutant",
    "Mutation",
    "Scoped",
    "build_class",
    "build_mutant_class",
    "function_mutations",
    "function_variants",
    "make_mutants",
    "payoff_scope",
    "preorder",
    "scope_contexts",
    "strip_function",
]

ROOTS = ("payoff", "exercise_value", "dates", "exercise_dates")
"""The methods whose code (and the helpers they reach) is mutated."""

NOT_HELPERS = frozenset({
    "reference", "reference_source", "scenario", "control_variates", "formula", "label", "params",
    "replace", "param_specs", "_check", "regression_state", "validated_dates", "early_exercise",
})
"""Attributes never followed as helpers: declarations, validation, the regression state."""


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
        if is_self_attr(n, ctx, ctx.params) and n.attr not in found:  # type: ignore[union-attr]
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


def function_variants(work: ast.FunctionDef, ctx: Context, operators: Sequence[str] | None = None
                      ) -> Iterator[tuple[int, ast.AST, ast.AST, tuple[str, str], str]]:
    """Every change the operators propose to ``work`` (a :func:`_strip` copy), de-duplicated:
    ``(node index, node, replacement, (operator, description), mutated function's source)``.
    ``work`` is left as it was; the replacement is a fresh node (a deep copy)."""
    names = list(OPERATORS) if operators is None else list(operators)
    unknown = [n for n in names if n not in OPERATORS]
    if unknown:
        raise InputError(
            f"operator={unknown[0]!r} is not a mutation operator; choose from {', '.join(OPERATORS)}"
        )
    seen = {ast.unparse(work)}
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
                yield index, node, copy.deepcopy(new), (name, description), text


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
    lines = source.splitlines(keepends=True)
    work = _strip(fn)
    owners = _statements(work)
    out: list[Mutation] = []
    qual = qualname or fn.name
    for index, node, new, (operator, description), text in function_variants(work, ctx, operators):
        new_lines = _splice(lines, node, new)
        diff = _diff(lines, new_lines, node.lineno, node.end_lineno, filename)  # type: ignore[attr-defined]
        stmt = owners.get(id(node))
        involved = _self_params(node, ctx) or (_self_params(stmt, ctx) if stmt is not None else ())
        out.append(Mutation(
            operator=operator, description=description, function=qual, line=node.lineno,  # type: ignore[attr-defined]
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


def build_class(cls: type[Product], scope: Sequence[Scoped], sources: dict[str, str], label: str = "",
                extra: dict[str, Any] | None = None) -> type[Product]:
    """The subclass of ``cls`` whose in-scope functions are rebound to a copy of the
    module's namespace (with ``extra`` names added), those named in ``sources`` (by
    qualified name) replaced by their compiled source."""
    module = sys.modules[cls.__module__]
    ns = dict(vars(module))
    ns.update(extra or {})
    rebound: dict[str, types.FunctionType] = {}
    for e in scope:
        text = sources.get(e.qualname)
        fn = _compile_function(text, ns, e, label) if text is not None else _rebind(e.func, ns)
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


def build_mutant_class(cls: type[Product], scope: Sequence[Scoped], target: Scoped,
                       source: str, label: str = "") -> type[Product]:
    """The subclass of ``cls`` whose in-scope functions are rebound to a copy of the
    module's namespace, with ``target`` replaced by the compiled ``source``."""
    return build_class(cls, scope, {target.qualname: source}, label)


def scope_contexts(cls: type[Product], scope: Sequence[Scoped]) -> dict[str, Context]:
    """What the operators may know in each in-scope function of ``cls``, by qualified name
    (the observation argument named as the payoff names it)."""
    payoff_entry = next((e for e in scope if e.name in ("payoff", "exercise_value")), None)
    obs_name = "obs"
    if payoff_entry is not None:
        args = payoff_entry.node.args.posonlyargs + payoff_entry.node.args.args
        if len(args) >= 2:
            obs_name = args[1].arg
    return {e.qualname: _context(cls, e, obs_name) for e in scope}


strip_function = _strip
preorder = _preorder


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
    contexts = scope_contexts(cls, scope)
    mutants: list[Mutant] = []
    discarded: list[Discarded] = []
    disp = _display_path(src.file)
    for entry in scope:
        ctx = contexts[entry.qualname]
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
