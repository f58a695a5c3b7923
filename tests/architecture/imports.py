"""The import graph of the ``limitcase`` package, read from the source with :mod:`ast`.

Every ``import`` and ``from ... import`` counts, wherever it is written (module level or
inside a function: a lazy import is still a dependency), except those under
``if TYPE_CHECKING:`` (never executed). Relative imports are resolved against the
importing module's package. ``from pkg import name`` depends on ``pkg.name`` when that is a
module of ours, else on ``pkg``. Importing ``limitcase.a.b`` also runs the package
``limitcase.a`` first, so that counts too; the package root ``limitcase`` does not (every
module would depend on it) nor do the importer's own packages (already running).
"""

from __future__ import annotations

import ast
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

SRC = Path(__file__).resolve().parents[2] / "src"
ROOT = SRC / "limitcase"


@dataclass(frozen=True)
class ImportRef:
    """One imported name: the importing module, the module imported from, the name (None for
    ``import x``), the line, and whether it is lazy (inside a function or class body)."""

    importer: str
    module: str
    name: str | None
    line: int
    lazy: bool


def module_name(path: Path) -> str:
    rel = path.relative_to(SRC).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


@lru_cache(maxsize=None)
def modules() -> dict[str, Path]:
    """Every module of the package, by dotted name."""
    return {module_name(p): p for p in sorted(ROOT.rglob("*.py"))}


def _is_package(name: str) -> bool:
    return modules()[name].name == "__init__.py"


def _type_checking_block(node: ast.AST) -> bool:
    if not isinstance(node, ast.If):
        return False
    test = node.test
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING"
    )


def _walk(node: ast.AST, lazy: bool = False):
    for child in ast.iter_child_nodes(node):
        if _type_checking_block(child):
            for other in child.orelse:  # the else branch runs
                yield from _walk(other, lazy)
            continue
        inner = lazy or isinstance(child, (ast.FunctionDef, ast.AsyncFunctionDef, ast.Lambda, ast.ClassDef))
        if isinstance(child, (ast.Import, ast.ImportFrom)):
            yield child, lazy
        yield from _walk(child, inner)


@lru_cache(maxsize=None)
def imports_of(name: str) -> tuple[ImportRef, ...]:
    """Every import written in module ``name`` (absolute module names)."""
    path = modules()[name]
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    package = name if _is_package(name) else name.rpartition(".")[0]
    out = []
    for node, lazy in _walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                out.append(ImportRef(name, alias.name, None, node.lineno, lazy))
            continue
        if node.level:
            base = package.split(".")
            if node.level > 1:
                base = base[: len(base) - (node.level - 1)]
            target = ".".join(base + ([node.module] if node.module else []))
        else:
            target = node.module or ""
        for alias in node.names:
            out.append(ImportRef(name, target, alias.name, node.lineno, lazy))
    return tuple(out)


def dependencies(name: str) -> dict[str, list[ImportRef]]:
    """Modules of ours that ``name`` depends on, each with the imports that make it so."""
    ours = modules()
    deps: dict[str, list[ImportRef]] = {}
    for ref in imports_of(name):
        if ref.name is not None and f"{ref.module}.{ref.name}" in ours:
            target = f"{ref.module}.{ref.name}"
        elif ref.module in ours:
            target = ref.module
        else:
            continue
        if target != name:
            deps.setdefault(target, []).append(ref)
        # importing a.b.c runs the packages a.b first: count them, except the package root
        # (every module would depend on it) and the importer's own packages (already running)
        parts = target.split(".")
        own = {".".join(name.split(".")[:k]) for k in range(1, name.count(".") + 1)}
        for k in range(2, len(parts)):
            parent = ".".join(parts[:k])
            if parent in ours and parent not in own and parent != name:
                deps.setdefault(parent, []).append(ref)
    return deps


@lru_cache(maxsize=None)
def graph() -> dict[str, set[str]]:
    return {m: set(dependencies(m)) for m in modules()}


def cycles(g: dict[str, set[str]]) -> list[list[str]]:
    """The strongly connected components with more than one module (Tarjan), each sorted."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on: set[str] = set()
    out: list[list[str]] = []
    counter = [0]

    def visit(v: str) -> None:
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on.add(v)
        for w in sorted(g.get(v, ())):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                out.append(sorted(comp))

    for v in sorted(g):
        if v not in index:
            visit(v)
    return out


def closure(start: str, g: dict[str, set[str]]) -> dict[str, str]:
    """Every module reachable from ``start``, each with the module that first reaches it."""
    seen: dict[str, str] = {}
    todo = [start]
    while todo:
        v = todo.pop()
        for w in sorted(g.get(v, ())):
            if w not in seen and w != start:
                seen[w] = v
                todo.append(w)
    return seen


def chain(start: str, target: str, via: dict[str, str]) -> str:
    """``start -> ... -> target`` through the ``via`` map of :func:`closure`."""
    path = [target]
    while path[-1] != start and path[-1] in via:
        path.append(via[path[-1]])
    return " -> ".join(reversed(path))


def declared_all(name: str) -> list[str] | None:
    """The literal ``__all__`` of module ``name``, or None when it has none."""
    tree = ast.parse(modules()[name].read_text(encoding="utf-8"))
    for node in tree.body:
        targets = node.targets if isinstance(node, ast.Assign) else (
            [node.target] if isinstance(node, ast.AnnAssign) else [])
        if any(isinstance(t, ast.Name) and t.id == "__all__" for t in targets):
            return list(ast.literal_eval(node.value))
    return None
