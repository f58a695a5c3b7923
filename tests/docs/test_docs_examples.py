"""The product and model references in docs/ stay true.

1. Every ```python block of docs/product-api.md and docs/model-api.md runs. Conventions
   (stated at the top of each page): a block whose first line is ``# fragment`` is an
   illustration and is not run; a block whose first line is ``# continued`` runs in the
   namespace of the last block that ran before it (fragments in between are skipped). Every product a block defines must pass
   ``assert_all_pass`` (one whose name starts with ``Broken`` must fail a check), and
   every model a block defines must pass its martingale audit (``Broken...``: fail it).
2. Every option of the declarations (the dataclass fields of ``Reduction``, ``Identity``,
   ``Monotone``, ``Convex``, ``Bound`` and ``Param``), every public field of the ``obs``
   object, every hook of ``Product`` and ``Model``, every testing helper and its keywords,
   and every option of the pytest plugin is named in the section of the docs that
   documents it, so an option added later without documentation fails here.
"""

from __future__ import annotations

import dataclasses
import inspect
import itertools
import re
from functools import cached_property
from pathlib import Path

import pytest

import limitcase.testing as lt
from limitcase import Bound, Convex, EndJump, Identity, Model, Monotone, Observed, Param, Product, Reduction
from limitcase.audits import run_audits
from limitcase.models import Degeneration, Simulated

DOCS = Path(__file__).resolve().parents[2] / "docs"
PRODUCT_DOC = DOCS / "product-api.md"
MODEL_DOC = DOCS / "model-api.md"

SMOKE_PATHS = 8192
"""Paths per product check here: two blocks. The examples' path-by-path checks do not
depend on the path count; their statistical checks are smoke tests at this size."""
AUDIT_PATHS = 16384
"""Paths of the martingale audit of a model defined in the docs (a drift error of 1% a
year is about 10 standard errors at two years)."""

_BLOCK = re.compile(r"^```python[ \t]*\n(.*?)^```[ \t]*$", re.S | re.M)


def python_blocks(path: Path) -> list[tuple[int, str]]:
    """``(line number, code)`` of every ```python block of a Markdown file."""
    text = path.read_text(encoding="utf-8")
    return [(text.count("\n", 0, m.start()) + 2, m.group(1)) for m in _BLOCK.finditer(text)]


def _first_line(code: str) -> str:
    return code.lstrip("\n").split("\n", 1)[0].strip()


def chains(path: Path) -> list[list[tuple[int, str]]]:
    """Runnable blocks grouped into chains: a block and the ``# continued`` blocks after it
    (fragments in between are not part of a chain)."""
    out: list[list[tuple[int, str]]] = []
    for line, code in python_blocks(path):
        head = _first_line(code)
        if head == "# fragment":
            continue
        if head == "# continued":
            assert out, f"{path.name}:{line}: '# continued' must come after a block that runs"
            out[-1].append((line, code))
        else:
            out.append([(line, code)])
    return out


def _chain_params() -> list:
    params = []
    for doc in (PRODUCT_DOC, MODEL_DOC):
        for chain in chains(doc):
            first, last = chain[0][0], chain[-1][0]
            params.append(pytest.param(doc, chain, id=f"{doc.name}:{first}" + (f"-{last}" if last != first else "")))
    return params


def test_both_pages_have_runnable_examples() -> None:
    assert len(chains(PRODUCT_DOC)) >= 5
    assert len(chains(MODEL_DOC)) >= 1
    # the conventions are stated where a reader sees them
    for doc in (PRODUCT_DOC, MODEL_DOC):
        text = doc.read_text(encoding="utf-8")
        assert "# fragment" in text and "# continued" in text


def _defined(ns: dict, module: str, base: type) -> list[type]:
    return [v for v in ns.values()
            if isinstance(v, type) and issubclass(v, base) and v.__module__ == module and not v.abstract]


@pytest.mark.parametrize(("doc", "chain"), _chain_params())
def test_docs_example_runs(doc: Path, chain: list[tuple[int, str]], monkeypatch: pytest.MonkeyPatch) -> None:
    """Each chain of blocks runs; the products and models it defines behave as claimed."""
    passed: set[type] = set()
    caught: set[type] = set()
    real_pass, real_caught = lt.assert_all_pass, lt.assert_caught

    def recording_pass(product, **kwargs):  # the block's own calls count as the check
        result = real_pass(product, **kwargs)
        passed.add(product if isinstance(product, type) else type(product))
        return result

    def recording_caught(product, case, **kwargs):
        result = real_caught(product, case, **kwargs)
        caught.add(product if isinstance(product, type) else type(product))
        return result

    monkeypatch.setattr(lt, "assert_all_pass", recording_pass)
    monkeypatch.setattr(lt, "assert_caught", recording_caught)
    module = f"docs_example_{doc.stem.replace('-', '_')}_{chain[0][0]}"
    ns: dict = {"__name__": module}
    for line, code in chain:
        exec(compile("\n" * (line - 1) + code, str(doc), "exec"), ns)  # line numbers as in the doc
    products = _defined(ns, module, Product)
    models = _defined(ns, module, Model)
    assert products or models or "assert" in "".join(c for _, c in chain), (
        f"{doc.name}:{chain[0][0]}: a runnable block should define a product or a model, or assert something"
    )
    for cls in products:
        if cls.__name__.startswith("Broken"):
            if cls not in caught:
                result = lt.run_product(cls, paths=SMOKE_PATHS)
                assert not result.ok, f"{cls.__name__} is meant to be broken but passes every check"
        elif cls not in passed:
            real_pass(cls, paths=SMOKE_PATHS)
    for cls in models:
        result = run_audits([cls()], ["martingale"], paths=AUDIT_PATHS)
        if cls.__name__.startswith("Broken"):
            assert not result.ok, f"{cls.__name__} is meant to be broken but passes the martingale audit"
        else:
            assert result.ok, [(o.case, o.verdict, o.message) for o in result.outcomes]


# ----------------------------------------------------------------------------------------
# every option documented


def section(path: Path, heading: str) -> str:
    """The text under the first heading containing ``heading``, up to the next heading of
    the same or a higher level."""
    lines = path.read_text(encoding="utf-8").split("\n")
    in_code = False
    start = level = None
    for i, line in enumerate(lines):
        if line.startswith("```"):
            in_code = not in_code
        if in_code:
            continue
        m = re.match(r"^(#+) (.*)$", line)
        if not m:
            continue
        if start is None and heading in m.group(2):
            start, level = i, len(m.group(1))
        elif start is not None and len(m.group(1)) <= level:
            return "\n".join(lines[start:i])
    assert start is not None, f"{path.name} has no heading containing {heading!r}"
    return "\n".join(lines[start:])


def _undocumented(text: str, names) -> list[str]:
    return sorted(n for n in names if f"`{n}`" not in text and f"`{n}=" not in text and f"`{n}(" not in text)


@pytest.mark.parametrize("cls", [Reduction, Identity, Monotone, Convex, Bound, EndJump, Param], ids=lambda c: c.__name__)
def test_every_declaration_option_is_documented(cls: type) -> None:
    names = [f.name for f in dataclasses.fields(cls)]
    init = [p for p in inspect.signature(cls).parameters if p != "self"]
    heading = "(`Param`)" if cls is Param else f"`{cls.__name__}`"
    text = section(PRODUCT_DOC, heading)
    missing = _undocumented(text, set(names) | set(init))
    assert not missing, f"{cls.__name__} options not documented in its section of {PRODUCT_DOC.name}: {missing}"


def signature_text(obj, name: str) -> str:
    """``name(a, b, *, c=1, d='')``: the call signature with its defaults as ``repr`` gives
    them (a dataclass field's default factory called), the form the docs quote."""
    facts = {f.name: f for f in dataclasses.fields(obj)} if dataclasses.is_dataclass(obj) else {}
    parts: list[str] = []
    star = False
    for p in inspect.signature(obj).parameters.values():
        if p.kind is p.KEYWORD_ONLY and not star:
            parts.append("*")
            star = True
        if p.kind is p.VAR_KEYWORD:
            parts.append(f"**{p.name}")
        elif p.default is p.empty:
            parts.append(p.name)
        else:
            f = facts.get(p.name)
            default = f.default_factory() if f is not None and f.default_factory is not dataclasses.MISSING else p.default
            parts.append(f"{p.name}={default!r}")
    return f"{name}({', '.join(parts)})"


@pytest.mark.parametrize("cls", [Reduction, Identity, Monotone, Convex, Bound, EndJump, Param], ids=lambda c: c.__name__)
def test_declaration_signatures_and_defaults_are_quoted_exactly(cls: type) -> None:
    """A changed default (or a new option) shows here: the docs quote each signature."""
    heading = "(`Param`)" if cls is Param else f"`{cls.__name__}`"
    expected = signature_text(cls, cls.__name__)
    assert f"`{expected}`" in section(PRODUCT_DOC, heading), f"{PRODUCT_DOC.name} should quote `{expected}`"


def test_testing_helper_signatures_are_quoted_exactly() -> None:
    text = section(PRODUCT_DOC, "Testing helpers")
    for name in lt.__all__:
        expected = signature_text(getattr(lt, name), name)
        assert f"`{expected}`" in text, f"{PRODUCT_DOC.name} should quote `{expected}` (defaults changed?)"


def observed_fields() -> set[str]:
    """The public fields a payoff can read on ``obs``."""
    names = {n for n in Observed.__slots__ if not n.startswith("_")}
    for klass in Observed.__mro__:
        for n, v in vars(klass).items():
            if not n.startswith("_") and isinstance(v, (property, cached_property)):
                names.add(n)
    return names


def test_every_obs_field_is_documented() -> None:
    fields = observed_fields()
    assert {"s", "s0", "t", "step_var", "uniforms", "paths"} <= fields  # the introspection sees them
    text = section(PRODUCT_DOC, "The `obs` object")
    missing = _undocumented(text, fields)
    assert not missing, f"obs fields not documented in {PRODUCT_DOC.name}: {missing}"


def _public_members(cls: type, base: type) -> set[str]:
    """Methods, properties and class attributes ``cls`` defines itself (not ``base``'s)."""
    return {n for n in vars(cls) if not n.startswith("_") and n not in vars(base)}


def test_every_product_hook_is_documented() -> None:
    from limitcase.params import Parametrised

    names = _public_members(Product, Parametrised) | {"_check", "params", "replace", "param_specs"}
    text = section(PRODUCT_DOC, "The `Product` class")
    missing = _undocumented(text, names)
    assert not missing, f"Product members not documented in {PRODUCT_DOC.name}: {missing}"


def test_every_model_hook_is_documented() -> None:
    from limitcase.params import Parametrised

    # beside the base class's members: attributes read from a model by name (getattr)
    names = _public_members(Model, Parametrised) | {"_simulate", "_check", "rate", "weak_order", "substeps",
                                                    "european_price"}
    text = section(MODEL_DOC, "The `Model` class")
    missing = _undocumented(text, names)
    assert not missing, f"Model members not documented in {MODEL_DOC.name}: {missing}"
    for cls, heading in ((Simulated, "`Simulated`"), (Degeneration, "Degenerations")):
        part = section(MODEL_DOC, heading)
        missing = _undocumented(part, [f.name for f in dataclasses.fields(cls)])
        assert not missing, f"{cls.__name__} fields not documented in {MODEL_DOC.name}: {missing}"


def test_every_testing_helper_and_keyword_is_documented() -> None:
    text = section(PRODUCT_DOC, "Testing helpers")
    for name in lt.__all__:
        assert f"`{name}(" in text or f"`{name}`" in text, f"limitcase.testing.{name} is not documented"
        params = [p for p in inspect.signature(getattr(lt, name)).parameters if p != "kwargs"]
        missing = [p for p in params if not re.search(rf"\b{re.escape(p)}\b", text)]
        assert not missing, f"limitcase.testing.{name}: parameters {missing} not documented"


def test_every_plugin_option_is_documented() -> None:
    from limitcase import pytest_plugin

    class _Recorder:
        def __init__(self) -> None:
            self.ini: list[str] = []
            self.flags: list[str] = []

        def getgroup(self, *args, **kwargs):
            return self

        def addoption(self, *flags, **kwargs) -> None:
            self.flags.extend(flags)

        def addini(self, name, *args, **kwargs) -> None:
            self.ini.append(name)

    rec = _Recorder()
    pytest_plugin.pytest_addoption(rec)  # type: ignore[arg-type]
    assert rec.ini and rec.flags
    text = section(PRODUCT_DOC, "The pytest plugin")
    missing = [n for n in itertools.chain(rec.ini, rec.flags) if n not in text]
    assert not missing, f"pytest plugin options not documented in {PRODUCT_DOC.name}: {missing}"
