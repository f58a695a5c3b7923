"""pytest plugin: a team's own products' reductions and relations as test items.

Installed with limitcase (entry point ``pytest11``), it does nothing until told where the
products are, in the ini file::

    [pytest]                         # or [tool.pytest.ini_options] in pyproject.toml
    limitcase_payoffs = payoffs      # files or folders of .py files, relative to the ini file
    limitcase_paths = 100000         # optional; default as `limitcase check` (100000)
    limitcase_seed = 20261201        # optional; default as `limitcase check`
    limitcase_alpha = 0.01           # optional; default as `limitcase check`
    limitcase_method = auto          # optional; sampling method, as `limitcase check --method`
    limitcase_model = models/mine.py:Mine:vol=0.3   # optional; every product under this model,
                                     # as `limitcase check --model` (a file relative to the ini file)

or on the command line: ``--limitcase-payoffs PATH`` (repeatable; collected whatever other
arguments are given), ``--limitcase-paths``, ``--limitcase-seed``, ``--limitcase-alpha``,
``--limitcase-method``, ``--limitcase-model``. Under a model, a product whose asset count
differs from the model's is one skipped item saying why; a model spec that cannot be resolved
is one failing item naming the problem.

Every declared case of every product found becomes one item,
``payoffs/mine.py::MyProduct::case``, marked ``limitcase`` (``-m limitcase`` runs only
them, ``-m "not limitcase"`` skips them). Items from the ini option are collected when
pytest runs its default selection (``testpaths`` or the current folder) or when an argument
names the payoff file or a folder above it; otherwise (``pytest tests/test_x.py``) not.

Verdicts are those of ``limitcase check``: each case draws from the same streams (seed and
case name), and Holm's correction runs over the limitcase items selected in the session
(after ``-k``/``-m`` deselection) at the family-wise level ``alpha``: the items are priced
together when the first one runs (it takes the time of all of them), and each item then
reports its own verdict. With the same settings and the same set of cases,
``limitcase check PATH`` gives the same verdicts. (Under pytest-xdist every worker prices
the whole family, so the correction stays over the whole selection.)
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterator

import pytest

__all__ = ["LimitcaseItem", "LimitcaseFile"]

_SETTINGS = pytest.StashKey["_Settings"]()
_RUN = pytest.StashKey["_Run"]()


@dataclass(frozen=True)
class _Settings:
    payoffs: tuple[Path, ...]
    from_command_line: tuple[Path, ...]
    paths: int
    seed: int
    alpha: float
    method: str
    model: str | None = None


def pytest_addoption(parser: pytest.Parser) -> None:
    group = parser.getgroup("limitcase", "limitcase: declared reductions and relations as test items")
    group.addoption("--limitcase-payoffs", action="append", default=[], metavar="PATH",
                    help="File or folder of product modules whose cases to collect (repeatable).")
    group.addoption("--limitcase-paths", type=int, default=None, metavar="N",
                    help="Monte Carlo paths per case (default: ini limitcase_paths, else as `limitcase check`).")
    group.addoption("--limitcase-seed", type=int, default=None, metavar="SEED",
                    help="Seed of the limitcase run (default: ini limitcase_seed, else limitcase's).")
    group.addoption("--limitcase-alpha", type=float, default=None, metavar="ALPHA",
                    help="Family-wise false-alarm rate over the limitcase items (Holm).")
    group.addoption("--limitcase-method", default=None, metavar="METHOD",
                    help="Sampling method of the limitcase items, as `limitcase check --method` (default auto).")
    group.addoption("--limitcase-model", default=None, metavar="SPEC",
                    help="Run every product under this model, as `limitcase check --model SPEC`.")
    parser.addini("limitcase_payoffs", type="paths", default=[],
                  help="Files or folders of product modules whose declared cases become test items.")
    parser.addini("limitcase_paths", default="", help="Monte Carlo paths per limitcase case.")
    parser.addini("limitcase_seed", default="", help="Seed of the limitcase run.")
    parser.addini("limitcase_alpha", default="", help="Family-wise false-alarm rate of the limitcase items.")
    parser.addini("limitcase_method", default="", help="Sampling method of the limitcase items (default auto).")
    parser.addini("limitcase_model", default="", help="Model spec every product runs under (default: its scenario).")


def _setting(config: pytest.Config, option: str, ini: str, kind: type, default: Any) -> Any:
    value = config.getoption(option)
    if value is not None:
        return value
    text = str(config.getini(ini) or "").strip()
    if not text:
        return default
    try:
        return kind(text)
    except ValueError:
        what = {int: "a whole number", float: "a number"}.get(kind, kind.__name__)
        raise pytest.UsageError(f"{ini} = {text!r} in the ini file is not {what}; e.g. {ini} = {default}") from None


def _settings(config: pytest.Config) -> _Settings | None:
    cli = tuple(Path(p).resolve() for p in config.getoption("limitcase_payoffs") or [])
    ini = tuple(Path(p).resolve() for p in config.getini("limitcase_payoffs") or [])
    if not cli and not ini:
        return None  # not configured: collect nothing, import nothing
    from .errors import ParamError
    from .settings import DEFAULT_ALPHA, DEFAULT_METHOD, DEFAULT_PATHS, DEFAULT_SEED, MIN_COMMAND_PATHS, validate_run

    paths = _setting(config, "limitcase_paths", "limitcase_paths", int, DEFAULT_PATHS)
    seed = _setting(config, "limitcase_seed", "limitcase_seed", int, DEFAULT_SEED)
    alpha = _setting(config, "limitcase_alpha", "limitcase_alpha", float, DEFAULT_ALPHA)
    method = _setting(config, "limitcase_method", "limitcase_method", str, DEFAULT_METHOD)
    try:
        validate_run(paths=paths, seed=seed, alpha=alpha, method=method, min_paths=MIN_COMMAND_PATHS)
    except ParamError as exc:
        raise pytest.UsageError(f"limitcase: {exc}") from None
    for p in cli + ini:
        if not p.exists():
            raise pytest.UsageError(f"limitcase payoffs path {p} does not exist; fix limitcase_payoffs / --limitcase-payoffs")
    model = config.getoption("limitcase_model")
    if model is None:
        model = _ini_model(config)
    return _Settings(ini + tuple(p for p in cli if p not in ini), cli, paths, seed, alpha, method, model or None)


def _ini_model(config: pytest.Config) -> str | None:
    """The ini file's model spec, a file in it made relative to the ini file's folder."""
    text = str(config.getini("limitcase_model") or "").strip()
    if not text:
        return None
    from .models.spec import parse_model_spec

    spec = parse_model_spec(text)
    if spec.is_path and config.inipath is not None and not Path(spec.target).is_absolute():
        return str(config.inipath.parent / spec.target) + text[len(spec.target):]
    return text


def pytest_configure(config: pytest.Config) -> None:
    config.addinivalue_line("markers", "limitcase: a declared reduction or relation checked by limitcase")
    st = _settings(config)
    if st is not None:
        config.stash[_SETTINGS] = st


def _py_files(root: Path) -> list[Path]:
    if root.is_dir():  # the folders and files `limitcase check` searches (not tests, venvs, ...)
        from .loader import folder_files

        return [f.resolve() for f in folder_files(root)]
    return [root] if root.suffix == ".py" else []


_MODEL = pytest.StashKey["tuple[Any, str | None]"]()


def _model(config: pytest.Config) -> tuple[Any, str | None]:
    """The session's model (None: each product's scenario) or why it cannot be made."""
    if _MODEL not in config.stash:
        st = config.stash[_SETTINGS]
        found: tuple[Any, str | None] = (None, None)
        if st.model:
            from .errors import LimitcaseError
            from .models.spec import resolve_model

            try:
                found = (resolve_model(st.model), None)
            except LimitcaseError as exc:
                found = (None, f"model {st.model!r}: {exc}")
        config.stash[_MODEL] = found
    return config.stash[_MODEL]


def _wanted(config: pytest.Config, st: _Settings) -> list[Path]:
    """The payoff files this session collects (see the module docstring)."""
    explicit = {f for p in st.from_command_line for f in _py_files(p)}
    everything = [f for p in st.payoffs for f in _py_files(p)]
    default_run = config.args_source != pytest.Config.ArgsSource.ARGS
    if default_run:
        chosen = everything
    else:
        targets = [Path(str(a).split("::")[0]).resolve() for a in config.args]
        chosen = [f for f in everything if f in explicit or any(f == t or t in f.parents for t in targets)]
    seen: set[Path] = set()
    return [f for f in chosen if not (f in seen or seen.add(f))]


@pytest.hookimpl(tryfirst=True)
def pytest_collection_modifyitems(session: pytest.Session, config: pytest.Config, items: list[pytest.Item]) -> None:
    st = config.stash.get(_SETTINGS, None)
    if st is None:
        return
    for f in _wanted(config, st):
        node = LimitcaseFile.from_parent(session, path=f)
        # genitems collects the file as pytest collects any node: collection reports and
        # item hooks fire, so counts, --collect-only and -k/-m treat the items as any other
        items.extend(session.genitems(node))


class LimitcaseFile(pytest.File):
    """A product module: one item per declared case of every product in it."""

    def collect(self) -> Iterator[pytest.Item]:
        from .errors import LimitcaseError
        from .loader import load_products
        from .plan import model_fits
        from .reduce import checks_for

        model, problem = _model(self.config)
        if problem is not None:
            yield LimitcaseBroken.from_parent(self, name="model", problem=problem)
            return
        try:
            products = load_products([self.path])
        except LimitcaseError as exc:
            yield LimitcaseBroken.from_parent(self, name="import", problem=str(exc))
            return
        for cls in products:
            try:
                why = model_fits(cls(), model) if model is not None else None
                checks = [] if why else checks_for(cls, model)
            except Exception as exc:  # the product cannot be built at its defaults
                yield LimitcaseBroken.from_parent(
                    self, name=cls.__name__, problem=f"{cls.__name__} cannot be built: {type(exc).__name__}: {exc}")
                continue
            if why:
                yield LimitcaseSkipped.from_parent(self, name=cls.__name__,
                                                   reason=f"{cls.__name__} {why} (limitcase model {model.label()})")
                continue
            if not checks:
                yield LimitcaseBroken.from_parent(
                    self, name=cls.__name__, problem=f"{cls.__name__} declares no reductions or relations")
            for check in checks:
                yield LimitcaseItem.from_parent(self, name=f"{cls.__name__}::{check.case}", check=check)


class CheckFailed(Exception):
    """A limitcase case did not pass."""

    def __init__(self, outcome: Any, text: str) -> None:
        super().__init__(text)
        self.outcome = outcome
        self.text = text


class LimitcaseItem(pytest.Item):
    """One declared case (a reduction or a relation) of one product."""

    def __init__(self, *, check: Any, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.check = check
        self.add_marker("limitcase")

    def runtest(self) -> None:
        run = self.config.stash.get(_RUN, None)
        if run is None:
            run = self.config.stash[_RUN] = _Run(self.session, self.config.stash[_SETTINGS])
        o = run.outcome(self)
        for key in ("verdict", "value", "stderr", "reference", "z", "p_adjusted"):
            self.user_properties.append((f"limitcase_{key}", getattr(o, key)))
        if o.verdict == "skip":  # no reference under the model: reported as a skip, never a pass
            pytest.skip(f"limitcase {o.product}/{o.case}: {o.message}")
        if o.verdict != "pass" or o.model_audit in ("fail", "error"):  # a model that fails its audit fails its checks
            raise CheckFailed(o, run.explain(self, o))

    def repr_failure(self, excinfo: pytest.ExceptionInfo[BaseException], style: Any = None) -> Any:
        if isinstance(excinfo.value, CheckFailed):
            return excinfo.value.text
        return super().repr_failure(excinfo)

    def reportinfo(self) -> tuple[Path, None, str]:
        return self.path, None, f"limitcase {self.check.kind} {self.check.label}"


class LimitcaseBroken(pytest.Item):
    """A product module that does not import, or a product that cannot be checked: one
    failing item, so the problem is seen and the rest of the session goes on."""

    def __init__(self, *, problem: str, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.problem = problem
        self.add_marker("limitcase")

    def runtest(self) -> None:
        raise CheckFailed(None, f"limitcase: {self.problem}")

    def repr_failure(self, excinfo: pytest.ExceptionInfo[BaseException], style: Any = None) -> Any:
        if isinstance(excinfo.value, CheckFailed):
            return excinfo.value.text
        return super().repr_failure(excinfo)

    def reportinfo(self) -> tuple[Path, None, str]:
        return self.path, None, f"limitcase {self.name}"


class LimitcaseSkipped(pytest.Item):
    """A product the session's model cannot run (another asset count): skipped, with why."""

    def __init__(self, *, reason: str, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.reason = reason
        self.add_marker("limitcase")

    def runtest(self) -> None:
        pytest.skip(self.reason)

    def reportinfo(self) -> tuple[Path, None, str]:
        return self.path, None, f"limitcase {self.name}"


class _Run:
    """Prices every selected limitcase item once, with Holm over them, on first use."""

    def __init__(self, session: pytest.Session, st: _Settings) -> None:
        self.session, self.st = session, st
        self.outcomes: dict[str, Any] | None = None
        self.m = 0
        self.audits: list[Any] = []

    def outcome(self, item: LimitcaseItem) -> Any:
        from .suite import run_checks

        if self.outcomes is None:
            items = [i for i in self.session.items if isinstance(i, LimitcaseItem)]
            if item not in items:
                items.append(item)
            result = run_checks([i.check for i in items], paths=self.st.paths, seed=self.st.seed,
                                alpha=self.st.alpha, method=self.st.method)
            self.outcomes = {i.nodeid: o for i, o in zip(items, result.outcomes)}
            self.m = len(items)
            self.audits = result.outcomes[len(items):]  # the run's model audits, listed after the items
        return self.outcomes[item.nodeid]

    def explain(self, item: LimitcaseItem, o: Any) -> str:
        def num(x: Any) -> str:
            return "-" if x is None else f"{x:.6g}"

        lines = [f"limitcase {o.kind} {o.product}/{o.case}: {o.verdict.upper()}"]
        if o.value is not None:
            lines.append(
                f"  value {num(o.value)} +/- {num(o.stderr)}, {o.sense} target {num(o.reference)}"
                f" ({o.target_source}), z {num(o.z)}, p {num(o.p_value)}, adjusted p {num(o.p_adjusted)}"
            )
        if o.message:
            lines.append(f"  {o.message}")
        lines.append(
            f"  settings: paths {self.st.paths}, seed {self.st.seed}, alpha {self.st.alpha:g}, "
            f"Holm over the {self.m} limitcase item(s) of this session"
            + (f" and the {len(self.audits)} martingale audit(s) of their models" if self.audits else "")
        )
        from .settings import reproduce_command

        lines.append("  reproduce: " + reproduce_command(
            "check", [str(item.path)], seed=self.st.seed, paths=self.st.paths, alpha=self.st.alpha,
            method=self.st.method, select=f"{o.product}/{o.case}", model=self.st.model))
        return "\n".join(lines)


def pytest_terminal_summary(terminalreporter: Any, exitstatus: int, config: pytest.Config) -> None:
    run = config.stash.get(_RUN, None)
    if run is None or run.outcomes is None:
        return
    counts: dict[str, int] = {}
    for o in run.outcomes.values():
        counts[o.verdict] = counts.get(o.verdict, 0) + 1
    text = ", ".join(f"{v} {k}" for k, v in sorted(counts.items()))
    terminalreporter.write_line(
        f"limitcase: {run.m} case(s): {text} (paths {run.st.paths}, seed {run.st.seed}, method {run.st.method}, "
        f"family-wise false-alarm rate {run.st.alpha:g}, Holm over the session's limitcase items)"
    )
