"""Equivalence: does a mutant pay what the original pays at every point the checks use?

Part of :mod:`limitcase.mutate` (the package docstring describes the method).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import asdict, dataclass
from typing import Any, Sequence

import numpy as np

from ..engine import PathRule, case_key, evaluate
from ..errors import LimitcaseError
from ..models.base import Model
from ..edges import edge_observed as _edge_observed
from ..edges import edge_paths
from ..product import Cashflows, Observed, Product
from ..reduce import Check, checks_for
from ..settings import MUTATE_EQUIVALENCE_PATHS, MUTATE_EQUIVALENCE_REGRESSION_PATHS
from ..suite import DEFAULT_SEED
from .dead import reuse_or_compare
from .shared import joint_with_original
from .encoding import json_safe

__all__ = [
    "EQUIVALENCE_PATHS",
    "Equivalence",
    "Point",
    "PointDifference",
    "check_points",
    "edge_paths",
    "equivalence",
    "probe_difference",
    "probe_point",
]

EQUIVALENCE_PATHS = MUTATE_EQUIVALENCE_PATHS
"""Random paths per parameter point on which a mutant is compared with the original."""

EQUIVALENCE_REGRESSION_PATHS = MUTATE_EQUIVALENCE_REGRESSION_PATHS
"""Pilot paths of the Longstaff-Schwartz fits in the equivalence runs (mutant and original
are fitted on the same pilot, so identical exercise values give identical policies)."""


TOLERANCE = PathRule((1.0, -1.0))
"""The engine's path-by-path tolerance, used for every equivalence comparison."""


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
                "points": [json_safe(asdict(p)) for p in self.points]}


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


def check_points(cls: type[Product], checks: Sequence[Check] | None = None, model: Model | None = None
                 ) -> list[Point]:
    """The parameter points the checks of ``cls`` price the product itself at: the product
    at its defaults under its scenario (or ``model``, the one every check runs under with
    ``--model``), then every leg of every check that is an instance of ``cls`` (reduction
    limits, relation legs), with that check's model; de-duplicated."""
    base = cls()
    scenario = base.scenario() if model is None else model
    checks = checks_for(cls, model) if checks is None else checks
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


def probe_point(cls: type[Product], model: Model | None = None) -> Point | None:
    """A parameter point no check uses: every finite positive real parameter of the
    defaults moved up by 10% and every count up by one (where the range allows), under the
    scenario (or ``model``). A mutant equivalent at the check points but not here is a bug the checks are
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
            return Point(p, p.scenario() if model is None else model, p.label() + " [off the check points]")
        except LimitcaseError:
            continue
    return None


def probe_difference(mutant_cls: type[Product], original: type[Product], *, paths: int = EQUIVALENCE_PATHS,
                     seed: int = DEFAULT_SEED, model: Model | None = None,
                     site: tuple[str, int] | tuple[str, int, int] | None = None,
                     variant: tuple[str, str] | None = None) -> PointDifference | None:
    """How the mutant compares with the original at :func:`probe_point` (``None`` if no
    such point can be made); under ``model`` when given; ``site`` and ``variant`` as for
    :func:`equivalence`."""
    pt = probe_point(mutant_cls, model)
    if pt is None:
        return None
    orig = original(**pt.product.params())
    n, bad, note = _edge_compare(orig, pt.product, pt.model, seed)
    if note and "dates" in note:
        return PointDifference(pt.label, n, bad, note=note)
    v, diff, se, price, sd, rnote = reuse_or_compare(_random_compare, orig, pt.product, pt.model, paths, seed,
                                                     case_key(original.__name__, "mutation-probe"), site, variant)
    return PointDifference(pt.label, n, bad, paths, v, diff, se, price, sd, note or rnote)


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
            joint = joint_with_original(mutant, original, model, rule=TOLERANCE, **kw)
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
                seed: int = DEFAULT_SEED, points: Sequence[Point] | None = None, stop_early: bool = False,
                model: Model | None = None, site: tuple[str, int] | tuple[str, int, int] | None = None,
                variant: tuple[str, str] | None = None) -> Equivalence:
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
    model
        The model every check runs under (``--model``); default: each product's scenario.
    site
        ``(module file, line[, column])`` of the mutated node: where the original, run on a
        point's paths in the mutant's place, never executes that statement (or, with the
        column, never evaluates that expression), the simulated comparison is the original's
        against itself, computed once per point and reused (:mod:`limitcase.mutate.dead`);
        the same numbers, bit for bit.
    variant
        ``(function's qualified name, mutated function's source)`` of the mutation: where
        the mutated expression runs but gives what the original's gives at every
        evaluation, the same reuse (:mod:`limitcase.mutate.infection`).

    Notes
    -----
    At each point both products must agree on their dates and exercise dates, on every
    deterministic edge path (:func:`edge_paths`), and on every simulated path of the
    point's model (a :class:`~limitcase.engine.PathRule` on their present values, the
    engine's tolerance). Edge paths are tried first at every point (they are cheap), then
    simulated paths.
    """
    pts = check_points(mutant_cls, model=model) if points is None else list(points)
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
        v, diff, se, price, sd, rnote = reuse_or_compare(_random_compare, orig, pt.product, pt.model, paths, seed,
                                                         case_key(name, "mutation-equivalence", str(i)), site,
                                                         variant)
        pd = PointDifference(pt.label, n, bad, paths, v, diff, se, price, sd, note or rnote)
        results.append(pd)
        if stop_early and pd.differs:
            break
    equivalent = not any(p.differs for p in results)
    return Equivalence(equivalent, tuple(results))
