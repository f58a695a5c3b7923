"""Sweeps toward a limit: a product priced at a sequence of parameter values that approach
a declared reduction's limit, for the dossier's pictures of a price converging.

How sweep values are chosen (:func:`sweep_values`)
--------------------------------------------------
A reduction moves a parameter from its default ``x0`` to a limit ``L``. The sweep is a
short sequence ``x_1, x_2, ..., x_m, L`` running from the default (or from a little before
it) to the limit, spaced so that each step halves what is left to go or doubles what has
been gone, which is the spacing at which a price approaching a limit changes visibly at
every step:

* **With an anchor** (a price level, typically the spot, lying behind the default: the
  default sits strictly between the anchor and the limit). The distance from the anchor
  doubles: ``A + (x0 - A) 2^k`` for ``k = -2, -1, 0, 1, ...``. An up barrier 140 above a
  spot of 100 going to infinity gives 110, 120, 140, 180, 260, 420, 740, inf; a down
  barrier 80 going to 0 gives 95, 90, 80, 60, 20, then (doubling would overshoot) the
  distance left to the limit halves: 10, 5, and finally 0.
* **Without an anchor**, toward a finite limit: the distance to the limit halves,
  ``L + (x0 - L) 2^{-k}`` (a strike 100 going to 0: 100, 50, 25, ...; a barrier 140 going
  to a spot of 100: 140, 120, 110, 105, ...), except when the limit is more than a factor
  4 away from a value of the same sign, where the value itself halves or doubles,
  ``x0 2^{-+k}`` (fixings 12, 6, 3, 2, then 1; monitoring dates 52, 104, 208, ...).
* **Without an anchor**, toward an infinite limit: the value doubles when it is positive
  (``x0 2^k``), else the distance from ``x0`` doubles from ``max(|x0|, 1)``.

Integer parameters are rounded and repeated values dropped; values outside the
parameter's declared range are dropped; the sequence is strictly monotone toward the
limit and ends with the limit itself.

:func:`plan_sweep` decides the anchor for a product: the spot of its scenario model is
taken as an anchor for a parameter that is not a count and whose default lies within a
factor :data:`LEVEL_RATIO` of the spot (a barrier, a strike: a price level). Everything else
is swept without an anchor. When a reduction moves several parameters, those it pushes to
an end of their declared range (a barrier to ``inf`` or 0, fixings to 1) are swept, and the
others (a rebate set to 3 for the case) are held at the case's value at every point; when
none is pushed to an end, the first listed is swept and the others held. A 0/1 flag (a
whole-number parameter with two values, :func:`is_flag`) is never swept: it keeps its
current value at every point before the limit and takes the case's value at the limit
(when only flags move, the sweep is the two points). Swept parameters move together, point
by point, each along its own sequence (the shorter ones hold their last value before the
limit); the picture's axis is the one taking the most distinct values (the first listed
on a tie), and a whole-number axis is drawn as separate points.

The prices of a sweep (:func:`run_sweep`) are estimated on common random numbers (one
:func:`limitcase.engine.evaluate` call, the case's own streams), so the curve is smooth
and its steps are precise; each point carries its standard error.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from .engine import BLOCK, DEFAULT_REGRESSION_PATHS, Estimate, case_key, evaluate, grid_of
from .errors import LimitcaseError, ParamError
from .models.base import Model
from .params import Param
from .product import Product
from .reduce import Check, Reduction, reduction_check
from .settings import REPORT_POINTS

__all__ = [
    "LEVEL_RATIO",
    "DEFAULT_POINTS",
    "MAX_SHARED_GRID",
    "sweep_values",
    "SweepPlan",
    "plan_sweep",
    "is_flag",
    "Sweep",
    "run_sweep",
    "Convergence",
    "convergence",
    "StepSweep",
    "step_parameter",
    "step_sweep",
]

LEVEL_RATIO = 4.0
"""A parameter whose default is within this factor of the spot is treated as a price level."""

DEFAULT_POINTS = REPORT_POINTS
"""Finite sweep points before the limit (the limit itself is added): the report's default."""

MAX_SHARED_GRID = 2048
"""Largest union date grid on which a sweep's products are priced together (common random
numbers); beyond it each point is priced on its own grid, so memory stays bounded."""


def _round_to(spec: Param, x: float) -> float | int:
    if spec.integer and math.isfinite(x):
        return int(round(x))
    return x


def sweep_values(
    spec: Param,
    start: float,
    limit: float,
    *,
    anchor: float | None = None,
    points: int = DEFAULT_POINTS,
) -> tuple[float | int, ...]:
    """Parameter values from ``start`` toward ``limit``, ending with ``limit``.

    Parameters
    ----------
    spec
        The declared parameter (its range and whether it is a count).
    start
        The value the sweep starts from (the product's current value).
    limit
        The reduction's limit (may be ``inf`` or ``-inf``).
    anchor
        A price level behind ``start`` (``start`` strictly between ``anchor`` and
        ``limit``) from which distances double; ignored otherwise.
    points
        At most this many finite values before the limit.

    Returns
    -------
    tuple
        Strictly monotone values, all inside the declared range, the last one ``limit``.

    Raises
    ------
    ParamError
        When ``start`` or ``limit`` is outside the parameter's range, or ``points < 1``.

    Notes
    -----
    See the module docstring for the spacing rules (doubling from the anchor, halving
    toward a finite limit, doubling toward an infinite one).
    """
    name = spec.name or "parameter"
    if not isinstance(points, int) or points < 1:
        raise ParamError(f"points={points!r} must be a whole number >= 1 (finite sweep values before the limit)")
    for what, v in (("start", start), ("limit", limit)):
        if not spec.contains(float(v)):
            raise ParamError(
                f"sweep {what} {name}={v!r} is outside {spec.range_text()}; "
                "a sweep runs between two values the parameter may take"
            )
    start, limit = float(start), float(limit)
    if start == limit:
        return (_round_to(spec, limit),)
    direction = 1.0 if limit > start else -1.0
    raw: list[float] = []
    use_anchor = (
        anchor is not None and math.isfinite(anchor) and (start - anchor) * direction > 0.0
    )
    if use_anchor:
        assert anchor is not None
        d0 = start - anchor
        k = -2
        while len(raw) < points:
            x = anchor + d0 * 2.0**k
            if math.isfinite(limit) and (limit - x) * direction <= 0.0:
                break
            raw.append(x)
            k += 1
        if math.isfinite(limit):
            last = raw[-1] if raw else start
            left = limit - last
            j = 1
            while len(raw) < points:
                raw.append(limit - left * 2.0**-j)
                j += 1
    elif math.isfinite(limit):
        ratio = limit / start if start != 0.0 else 0.0
        if ratio > 0.0 and (ratio > LEVEL_RATIO or ratio < 1.0 / LEVEL_RATIO):
            factor = 0.5 if abs(limit) < abs(start) else 2.0
            x = start
            while len(raw) < points and (limit - x) * direction > 0.0:
                raw.append(x)
                x *= factor
        else:
            raw = [limit + (start - limit) * 2.0**-k for k in range(points)]
    else:
        if start > 0.0 and direction > 0:
            raw = [start * 2.0**k for k in range(points)]
        elif start < 0.0 and direction < 0:
            raw = [start * 2.0**k for k in range(points)]
        else:
            scale = max(abs(start), 1.0)
            raw = [start + direction * scale * (2.0**k - 1.0) for k in range(points)]
    out: list[float | int] = []
    for x in raw:
        v = _round_to(spec, x)
        if not spec.contains(float(v)):
            continue
        if (limit - float(v)) * direction <= 0.0:  # rounding reached the limit
            continue
        if out and (float(v) - float(out[-1])) * direction <= 0.0:
            continue
        out.append(v)
    out.append(_round_to(spec, limit))
    return tuple(out)


def _resolve(value: Any, product: Product) -> Any:
    return value(product) if callable(value) else value


@dataclass(frozen=True)
class SweepPlan:
    """What a sweep will price: one dict of parameter values per point, the limit last."""

    product: str
    case: str
    param: str
    points: tuple[dict[str, Any], ...]
    anchor: float | None = None
    skipped: tuple[str, ...] = ()

    @property
    def values(self) -> tuple[Any, ...]:
        """The swept (first) parameter's value at each point."""
        return tuple(p[self.param] for p in self.points)


def is_flag(spec: Param) -> bool:
    """A whole-number parameter with at most two values (a 0/1 switch): it is set, never
    swept."""
    return bool(spec.integer and spec.high - spec.low <= 1)


def _spot(model: Model) -> float | None:
    s0 = np.asarray(model.initial(), dtype=float).reshape(-1)
    if s0.size and np.all(s0 == s0[0]) and math.isfinite(s0[0]) and s0[0] > 0:
        return float(s0[0])
    return None


def plan_sweep(
    product: Product, reduction: Reduction, model: Model | None = None, *, points: int = DEFAULT_POINTS
) -> SweepPlan:
    """The sweep of one reduction of ``product``, from its current values to the limit.

    The first parameter the reduction moves labels the axis; every moved parameter follows
    its own :func:`sweep_values` sequence, point by point. Points whose combination the
    product rejects (its ``_check``) are skipped and listed in ``skipped``.

    Raises
    ------
    ParamError
        When the reduction moves no parameter away from its current value.
    """
    model = product.scenario() if model is None else model
    name = type(product).__name__
    specs = type(product).param_specs()
    here = product.params()
    limits = {k: _resolve(v, product) for k, v in reduction.changes.items()}
    moved = [k for k, v in limits.items() if k in specs and float(v) != float(here[k])]
    if not moved:
        raise ParamError(
            f"{name}/{reduction.name}: the reduction moves no parameter away from its value "
            f"({limits!r}); there is nothing to sweep"
        )
    pushed = [k for k in moved if float(limits[k]) in (specs[k].low, specs[k].high)]
    moved = pushed or moved[:1]
    # a 0/1 flag (or any whole-number parameter with two values) has nothing between its
    # values: it keeps its current value until the limit, unless it is all that moves
    flags = [k for k in moved if is_flag(specs[k])]
    if len(flags) < len(moved):
        moved = [k for k in moved if k not in flags]
    else:
        flags = []
    spot = _spot(model)
    seqs: dict[str, tuple[Any, ...]] = {}
    anchor_used: float | None = None
    for k in moved:
        spec = specs[k]
        x0 = float(here[k])
        anchor = None
        if spot is not None and not spec.integer and x0 != 0.0:
            ratio = x0 / spot
            if 1.0 / LEVEL_RATIO <= ratio <= LEVEL_RATIO:
                anchor = spot
        seqs[k] = sweep_values(spec, x0, float(limits[k]), anchor=anchor, points=points)
        if k == moved[0] and anchor is not None and (x0 - anchor) * (float(limits[k]) - x0) > 0:
            anchor_used = anchor
    # the axis: the swept parameter taking the most distinct values (the first on a tie)
    moved.sort(key=lambda k: -len(set(seqs[k])))
    n = max(len(s) for s in seqs.values())
    plan_points: list[dict[str, Any]] = []
    skipped: list[str] = []
    for i in range(n):
        values = dict(limits) if i == n - 1 else {}
        if i < n - 1:
            for k, s in seqs.items():
                finite = s[:-1] or (here[k],)
                values[k] = finite[min(i, len(finite) - 1)]
            for k in flags:
                values[k] = here[k]
            # parameters the reduction sets but does not sweep are held at the case's value
            for k, v in limits.items():
                values.setdefault(k, v)
        try:
            product.replace(**values)
        except LimitcaseError as exc:
            skipped.append(f"{values}: {exc}")
            continue
        plan_points.append(values)
    return SweepPlan(name, reduction.name, moved[0], tuple(plan_points), anchor_used, tuple(skipped))


@dataclass(frozen=True)
class Sweep:
    """Prices along a sweep, with the reduction's check (its target is the base value)."""

    plan: SweepPlan
    products: tuple[Product, ...]
    estimates: tuple[Estimate, ...]
    check: Check
    model: Model | None
    shared_paths: bool
    error: str | None = None
    info: str = ""

    @property
    def target(self) -> float | None:
        """The base case's trusted value (the horizontal line), if the check built."""
        return None if self.check.error is not None or self.check.skip is not None else self.check.target


def run_sweep(
    product: Product,
    reduction: Reduction,
    model: Model | None = None,
    *,
    paths: int,
    seed: int,
    points: int = DEFAULT_POINTS,
    regression_paths: int = DEFAULT_REGRESSION_PATHS,
    on_batch: Callable[[int], None] | None = None,
) -> Sweep:
    """Price ``product`` along the sweep of ``reduction`` under the check's model.

    The model is the one the reduction's check uses (the product's scenario with the
    reduction's ``model_changes``). All points share paths (common random numbers) drawn
    from the streams of the case ``product/reduction`` when their union date grid has at
    most :data:`MAX_SHARED_GRID` dates; otherwise each point is priced on its own.

    Returns a :class:`Sweep`; a sweep that cannot be built or priced carries ``error``
    instead of raising, so one product's failure does not stop a report.
    """
    model = product.scenario() if model is None else model
    check = reduction_check(product, model, reduction)
    run_model = check.model if check.model is not None else model
    empty = SweepPlan(type(product).__name__, reduction.name, "", ())
    try:
        here = product.params()
        moves = any(k in here and float(_resolve(v, product)) != float(here[k]) for k, v in reduction.changes.items())
    except Exception:
        moves = True  # let plan_sweep report the declaration's error
    if not moves:
        return Sweep(empty, (), (), check, run_model, False,
                     info="the case checks the product at its own parameters: there is no limit to sweep toward")
    try:
        if reduction.model_changes and check.model is None:
            run_model = model.replace(**dict(reduction.model_changes))
        plan = plan_sweep(product, reduction, run_model, points=points)
    except LimitcaseError as exc:
        return Sweep(empty, (), (), check, run_model, False, error=str(exc))
    except Exception as exc:  # the product's declaration code failed
        return Sweep(empty, (), (), check, run_model, False, error=f"{type(exc).__name__}: {exc}")
    try:
        legs = [product.replace(**values) for values in plan.points]
    except LimitcaseError as exc:
        return Sweep(plan, (), (), check, run_model, False, error=str(exc))
    key = case_key(plan.product, plan.case)

    def alone(leg: Product) -> Estimate:
        return evaluate([leg], run_model, paths=paths, seed=seed, key=key,
                        regression_paths=regression_paths, on_batch=on_batch).estimate([1.0])

    shared = len(grid_of(legs)) <= MAX_SHARED_GRID
    try:
        if not shared:
            raise _PriceApart
        joint = evaluate(legs, run_model, paths=paths, seed=seed, key=key,
                         regression_paths=regression_paths, on_batch=on_batch)
        estimates = tuple(joint.estimate(_unit(len(legs), i)) for i in range(len(legs)))
    except (_PriceApart, LimitcaseError):
        # price the points one by one and keep those the model can price (a point may need
        # another model, e.g. a basket of 3 assets under the 1-asset model of its limit)
        shared = False
        kept_points, kept_legs, kept_est = [], [], []
        problems: list[tuple[dict[str, Any], str]] = []
        for values, leg in zip(plan.points, legs):
            try:
                kept_est.append(alone(leg))
                kept_points.append(values)
                kept_legs.append(leg)
            except LimitcaseError as exc:
                problems.append((values, str(exc)))
        if len(kept_est) < 2:
            why = problems[0][1] if problems else "fewer than two points could be priced"
            return Sweep(plan, (), (), check, run_model, False,
                         error=f"the points before the limit cannot be priced under the case's model ({why})")
        plan = SweepPlan(plan.product, plan.case, plan.param, tuple(kept_points), plan.anchor,
                         plan.skipped + tuple(f"{v}: {m}" for v, m in problems))
        legs, estimates = kept_legs, tuple(kept_est)
    return Sweep(plan, tuple(legs), estimates, check, run_model, shared)


class _PriceApart(Exception):
    """Internal: the sweep's union date grid is too large to price its points together."""


def _unit(n: int, i: int) -> tuple[float, ...]:
    w = [0.0] * n
    w[i] = 1.0
    return tuple(w)


# ----------------------------------------------------------------------------------------
# convergence in the number of paths and in the time step


@dataclass(frozen=True)
class Convergence:
    """A product's estimate at a doubling sequence of path counts (nested: the first
    ``n`` paths of the largest run are the run with ``n`` paths)."""

    product: Product
    model: Model
    estimates: tuple[Estimate, ...]
    error: str | None = None

    @property
    def paths(self) -> tuple[int, ...]:
        return tuple(e.paths for e in self.estimates)

    def slope(self) -> float | None:
        """Least-squares slope of log(stderr) on log(paths); about -1/2 for Monte Carlo
        (the standard error of a mean of n independent paths is sigma / sqrt(n))."""
        pts = [(math.log(e.paths), math.log(e.stderr)) for e in self.estimates if e.stderr > 0]
        if len(pts) < 2:
            return None
        x, y = np.array(pts).T
        return float(np.polyfit(x, y, 1)[0])


def _doubling_counts(paths: int, smallest: int = BLOCK // 4) -> list[int]:
    counts = []
    n = paths
    while n >= smallest and len(counts) < 12:
        counts.append(n)
        n //= 2
    return sorted(set(counts)) or [paths]


def convergence(
    product: Product,
    model: Model | None = None,
    *,
    paths: int,
    seed: int,
    regression_paths: int = DEFAULT_REGRESSION_PATHS,
) -> Convergence:
    """Estimates of ``product`` with ``paths, paths/2, paths/4, ...`` paths (down to 1024).

    Each count is its own :func:`limitcase.engine.evaluate` call on the streams of the
    case ``product/convergence``; the block streams make the runs nested. The cost is
    about twice that of the largest run.
    """
    model = product.scenario() if model is None else model
    key = case_key(type(product).__name__, "convergence")
    try:
        ests = tuple(
            evaluate([product], model, paths=n, seed=seed, key=key, regression_paths=regression_paths).estimate([1.0])
            for n in _doubling_counts(paths)
        )
    except LimitcaseError as exc:
        return Convergence(product, model, (), error=str(exc))
    return Convergence(product, model, ests)


@dataclass(frozen=True)
class StepSweep:
    """A product's estimate as a model's time-step parameter is refined."""

    product: Product
    param: str
    models: tuple[Model, ...]
    estimates: tuple[Estimate, ...]
    error: str | None = None

    @property
    def values(self) -> tuple[Any, ...]:
        return tuple(m.params()[self.param] for m in self.models)


def step_parameter(model: Model) -> str | None:
    """The name of a discretised model's time-step parameter: an integer parameter whose
    name contains ``step`` (e.g. ``substeps``) on a model that declares ``exact = False``;
    ``None`` for a model simulated exactly on any date grid."""
    if getattr(type(model), "exact", True) is not False:
        return None
    for name, spec in type(model).param_specs().items():
        if spec.integer and "step" in name.lower():
            return name
    return None


def step_sweep(
    product: Product,
    model: Model | None = None,
    *,
    paths: int,
    seed: int,
    levels: int = 4,
    regression_paths: int = DEFAULT_REGRESSION_PATHS,
) -> StepSweep | None:
    """Estimates with the model's step parameter at ``n, 2n, 4n, ...`` (``levels`` values
    within its range, ``n`` its current value), each on the streams of the case
    ``product/time_step``. ``None`` when the model has no step parameter.

    A weakly convergent scheme of order ``p`` has a bias ``O(h^p)`` in the step ``h``: the
    estimates settle as the step is refined, and their spread against the standard errors
    shows whether the default step is fine enough for the product.
    """
    model = product.scenario() if model is None else model
    name = step_parameter(model)
    if name is None:
        return None
    spec = type(model).param_specs()[name]
    n0 = int(model.params()[name])
    values = [n0 * 2**k for k in range(levels) if spec.contains(float(n0 * 2**k))]
    key = case_key(type(product).__name__, "time_step")
    try:
        models = tuple(model.replace(**{name: v}) for v in values)
        ests = tuple(
            evaluate([product], m, paths=paths, seed=seed, key=key, regression_paths=regression_paths).estimate([1.0])
            for m in models
        )
    except LimitcaseError as exc:
        return StepSweep(product, name, (), (), error=str(exc))
    return StepSweep(product, name, models, ests)
