"""Batched Monte Carlo: random streams, paths, cash flows, estimates.

Reproducibility. Paths come in fixed blocks of :data:`BLOCK` paths; block ``b`` of a case
with key ``k`` draws from its own stream ``SeedSequence(seed, spawn_key=(k, 1, b))``.
A block is summarised on its own (by whichever process computes it) and the summaries are
combined in block order, so the numbers do not depend on the batch size, on how many
processes share the blocks, or on how many more blocks are added later: a longer run
extends a shorter one.

Streams. Role 1: pricing paths (block ``b``). Role 0: the Longstaff-Schwartz pilot; role 2:
the pilot's uniforms. Role 3: the control-variate pilot. The Sobol scrambles have streams
of their own (:mod:`limitcase.sampling`).

Memory. At most one block of paths lives at a time per process: about
``BLOCK x grid dates x normals per step x 8 bytes`` for the normals (overwritten in place by
the prices), plus what the payoffs allocate on one block, plus, for products with early
exercise, the regression pilot (``regression_paths x grid dates``). The path count itself
never enters the bound.

Common random numbers. All products handed to :func:`evaluate` together see the same paths,
on the union of their dates; each reads its own dates only.

Variance reduction (``method=``, see :mod:`limitcase.sampling` for the sources of normals).
Control variates: products ``C_j`` with exact prices ``mu_j`` (the product's
:meth:`~limitcase.product.Product.control_variates` hook, and the discounted underlying at
each leg's last date, whose price is the model's discounted forward ``S0 exp(-q T)``) are
priced on the same paths, and a statistic ``Y = sum_i w_i V_i`` is estimated by

    Y_cv = mean(Y) - beta . (mean(C) - mu),   beta = Cov(C)^+ Cov(C, Y),

with ``beta`` from pilot paths of their own (role 3), independent of the pricing paths: then
``E[Y_cv] = E[Y]`` exactly, and the standard error is that of the per-path values
``Y - beta . C`` (Glasserman 2004, *Monte Carlo Methods in Financial Engineering*,
Section 4.1; the pilot removes the O(1/n) bias of a coefficient fitted on the same paths).
A control whose "exact" price is wrong biases the estimate by ``beta`` times its error: a
check that fails only with controls points at the control (re-run with ``--method plain``).
With Sobol points, controls apply to a statistic only when they explain at least
:data:`SOBOL_CONTROL_R2` of its pilot variance (decided on the pilot, so still unbiased).
"""

from __future__ import annotations

import math
import zlib
from dataclasses import dataclass, field
from typing import Any, Callable, Sequence

import numpy as np

from .errors import LimitcaseError, ParamError, PayoffError
from .models.base import Model, Simulated
from .params import Param
from .product import Cashflows, Observed, Product
from .sampling import MethodSpec, Moments, Sampler, make_sampler, resolve_method

__all__ = [
    "BLOCK",
    "Estimate",
    "Joint",
    "PathRule",
    "evaluate",
    "price",
    "coerce_seed",
    "case_key",
    "block_generator",
    "gather_controls",
]

BLOCK = 4096
"""Paths per random-stream block. Part of the numbers: changing it changes every result."""

DEFAULT_BATCH = BLOCK
DEFAULT_REGRESSION_PATHS = 1 << 16
CONTROL_PILOT_BLOCKS = 2
"""Blocks of pilot paths (role 3) on which control-variate coefficients are estimated."""
SOBOL_CONTROL_R2 = 0.9
"""With Sobol points, controls are applied to a statistic only when they explain at least
this share of its variance on the pilot. Quasi-random points already integrate the smooth
part a weak control would remove, and the control's own quasi-random error can then
outweigh its gain (measured, benchmarks/efficiency.py --others: a cash-or-nothing call,
1.7 times the variance of Sobol points alone; the geometric control of an arithmetic Asian,
R^2 = 0.999, divides it by 30)."""


@dataclass(frozen=True, slots=True)
class Estimate:
    """A Monte Carlo estimate: value, standard error, the number of paths behind it, and the
    degrees of freedom of the standard error (``inf`` when it is a large-sample one)."""

    value: float
    stderr: float
    paths: int
    dof: float = math.inf

    def interval(self, z: float = 1.96) -> tuple[float, float]:
        """Symmetric confidence interval ``value +/- z * stderr``."""
        return (self.value - z * self.stderr, self.value + z * self.stderr)

    def __str__(self) -> str:
        return f"{self.value:.6g} +/- {self.stderr:.2g} ({self.paths} paths)"


@dataclass(frozen=True, slots=True)
class PathRule:
    """A combination of the legs' present values that must hold on every path:
    ``sum(w_i * pv_i) == 0`` (or ``>= 0``, ``<= 0``) to floating-point tolerance."""

    weights: tuple[float, ...]
    sense: str = "=="
    rtol: float = 1e-9
    atol: float = 1e-9


@dataclass
class PathRuleResult:
    """How a :class:`PathRule` fared: violations and the worst one."""

    rule: PathRule
    violations: int = 0
    worst: float = 0.0
    worst_path: int = -1

    def merge(self, violations: int, worst: float, worst_path: int) -> None:
        """Add one block's tally (blocks merged in order: the first worst path is kept)."""
        self.violations += violations
        if violations and worst > self.worst:
            self.worst, self.worst_path = worst, worst_path


@dataclass
class Joint:
    """Joint statistics of the legs' discounted cash flows over common paths.

    ``mean`` are the legs' plain sample means (unbiased under every method). ``cov`` is
    scaled so that ``cov / paths`` is the covariance of ``mean`` as an estimator: the sample
    covariance of the per-path values for independent paths, the same computed over pair
    means or scramble means for antithetic and Sobol sampling. ``dof`` are the degrees of
    freedom of that covariance. With control variates, :meth:`estimate` applies them.
    """

    paths: int
    mean: np.ndarray
    cov: np.ndarray
    rules: list[PathRuleResult] = field(default_factory=list)
    method: str = "plain"
    dof: float = math.inf
    controls: tuple[str, ...] = ()
    control_mean: np.ndarray | None = None
    control_exact: np.ndarray | None = None
    full_cov: np.ndarray | None = None  # legs + controls, scaled like ``cov``
    pilot_cov: np.ndarray | None = None  # legs + controls, per path, on the pilot
    notes: tuple[str, ...] = ()
    control_min_r2: float = 0.0

    def beta(self, weights: Sequence[float]) -> np.ndarray:
        """Control-variate coefficients of ``sum(w_i * price_i)``, from the pilot paths:
        ``beta = Cov(C)^+ Cov(C, Y)`` (pseudo-inverse: duplicate controls are harmless)."""
        if self.pilot_cov is None:
            return np.zeros(0)
        w = np.asarray(weights, dtype=float)
        k = len(self.mean)
        pcc = self.pilot_cov[k:, k:]
        pcy = self.pilot_cov[k:, :k] @ w
        return np.linalg.pinv(pcc, rcond=1e-10, hermitian=True) @ pcy

    def pilot_r2(self, weights: Sequence[float]) -> float:
        """The share of the pilot variance of ``sum(w_i * V_i)`` the controls explain."""
        if self.pilot_cov is None:
            return 0.0
        w = np.asarray(weights, dtype=float)
        k = len(self.mean)
        var_y = float(w @ self.pilot_cov[:k, :k] @ w)
        if not var_y > 0.0:
            return 0.0
        explained = float((self.pilot_cov[k:, :k] @ w) @ self.beta(w))
        return min(max(explained / var_y, 0.0), 1.0)

    def uses_controls(self, weights: Sequence[float]) -> bool:
        """Whether :meth:`estimate` applies the controls to this statistic: always when the
        paths are pseudo-random; with Sobol points only when the controls explain at least
        ``control_min_r2`` of its variance on the pilot (a decision on independent paths,
        which keeps the estimate unbiased)."""
        if self.control_mean is None or self.full_cov is None or not len(self.controls):
            return False
        return self.control_min_r2 <= 0.0 or self.pilot_r2(weights) >= self.control_min_r2

    def method_for(self, weights: Sequence[float]) -> str:
        """The method behind :meth:`estimate` of this statistic (``control+...`` only when
        the controls are applied to it)."""
        if self.controls and not self.uses_controls(weights):
            base = self.method.removeprefix("control+")
            return "plain" if base == "control" else base
        return self.method

    def estimate(self, weights: Sequence[float], *, controls: bool = True) -> Estimate:
        """The estimate of ``sum(w_i * price_i)`` with its standard error (covariances
        included: common random numbers make differences precise), control variates applied
        when the run has them, ``controls`` is true and :meth:`uses_controls` says so."""
        w = np.asarray(weights, dtype=float)
        if w.shape != self.mean.shape:
            raise ParamError(f"weights of length {w.size} for {self.mean.size} legs; give one weight per leg")
        if controls and self.uses_controls(w):
            b = self.beta(w)
            assert self.control_exact is not None and self.control_mean is not None and self.full_cov is not None
            value = float(w @ self.mean - b @ (self.control_mean - self.control_exact))
            v = np.concatenate([w, -b])
            var = float(v @ self.full_cov @ v)
        else:
            value = float(w @ self.mean)
            var = float(w @ self.cov @ w)
        se = math.sqrt(max(var, 0.0) / self.paths) if self.paths > 1 and math.isfinite(var) else math.inf
        return Estimate(value, se, self.paths, self.dof)


def coerce_seed(seed: None | int | np.random.SeedSequence) -> np.random.SeedSequence:
    """The one place a user's seed becomes a :class:`numpy.random.SeedSequence`."""
    if isinstance(seed, np.random.SeedSequence):
        return seed
    if seed is None:
        return np.random.SeedSequence()
    if isinstance(seed, (int, np.integer)) and not isinstance(seed, bool) and seed >= 0:
        return np.random.SeedSequence(int(seed))
    raise ParamError(f"seed={seed!r} must be None, a non-negative integer or a SeedSequence")


def case_key(*labels: str) -> int:
    """A stable 32-bit key for a case, so its streams do not depend on the other cases run."""
    return zlib.crc32("/".join(labels).encode("utf-8"))


def block_generator(seed: np.random.SeedSequence, key: int, role: int, block: int) -> np.random.Generator:
    """The generator of one block: ``role`` 1 for pricing paths, 0 for the regression pilot."""
    ss = np.random.SeedSequence(seed.entropy, spawn_key=tuple(seed.spawn_key) + (key, role, block))
    return np.random.Generator(np.random.PCG64(ss))


# ----------------------------------------------------------------------------------------
# grid, views, present values


class _Leg:
    """A product placed on the common grid."""

    def __init__(self, product: Product, grid: np.ndarray, model: Model) -> None:
        self.product = product
        self.name = type(product).__name__
        self.dates = product.validated_dates()
        self.idx = np.searchsorted(grid, self.dates)
        n = len(self.idx)
        full = n == len(grid)
        contiguous = n > 0 and np.all(np.diff(self.idx) == 1)
        self.sel: Any = slice(None) if full else (slice(self.idx[0], self.idx[-1] + 1) if contiguous else self.idx)
        if product.multi_asset:
            if product.n_assets != model.n_assets:
                raise ParamError(
                    f"{self.name} reads {product.n_assets} assets but the model "
                    f"{type(model).__name__} simulates {model.n_assets}"
                )
        elif model.n_assets != 1:
            raise ParamError(
                f"{self.name} is a single-asset product but the model simulates {model.n_assets} assets"
            )
        self.s0 = model.initial() if product.multi_asset else float(model.initial()[0])
        self.dividend = model.dividend_yields() if product.multi_asset else float(model.dividend_yields()[0])

    def observe(self, sim: Simulated, rate: float, uniforms: Callable[[], np.ndarray] | None = None) -> Observed:
        s = sim.s[:, self.sel, :]
        if not self.product.multi_asset:
            s = s[:, :, 0]
        s = s.view()
        s.flags.writeable = False  # a payoff must not write into shared paths
        idx = self.idx

        def step_var() -> np.ndarray:
            cum = np.cumsum(sim.step_var, axis=1)[:, idx, :]
            v = np.diff(cum, axis=1, prepend=0.0)
            return v if self.product.multi_asset else v[:, :, 0]

        def leg_uniforms() -> np.ndarray:
            u = uniforms()[:, idx, :]  # type: ignore[misc]
            u.flags.writeable = False
            return u if self.product.multi_asset else u[:, :, 0]

        return Observed(
            self.dates, s, self.s0, rate, step_var, self.dividend, leg_uniforms if uniforms is not None else None
        )


def _present_values(leg: _Leg, obs: Observed, rate: float, policy: Any) -> np.ndarray:
    """Per-path present value of one product's cash flows, validated."""
    name = leg.name
    n = obs.paths
    try:
        if policy is not None:
            out: Any = policy.cashflows(leg.product, obs)
        else:
            out = leg.product.payoff(obs)
    except PayoffError:
        raise
    except Exception as exc:  # the product's own code failed: report it, keep the run going
        raise PayoffError(f"{name}.payoff raised {type(exc).__name__}: {exc}") from exc
    if isinstance(out, Cashflows):
        amount = np.asarray(out.amount, dtype=float)
        if amount.ndim not in (1, 2) or amount.shape[0] != n:
            raise PayoffError(
                f"{name}.payoff returned Cashflows.amount of shape {amount.shape}; expected ({n},) or ({n}, k)"
            )
        try:
            time = np.broadcast_to(np.asarray(out.time, dtype=float), amount.shape)
        except ValueError as exc:
            raise PayoffError(f"{name}.payoff: Cashflows.time does not broadcast to amount {amount.shape}") from exc
        if not np.all(np.isfinite(time)) or np.any(time < 0):
            raise PayoffError(f"{name}.payoff: payment times must be finite and >= 0")
        disc = np.exp(-rate * time)
    else:
        amount = np.asarray(out, dtype=float)
        if amount.shape == (n,):
            disc = math.exp(-rate * obs.t[-1])
        elif amount.shape == (n, len(obs.t)):
            disc = np.exp(-rate * obs.t)[None, :]
        else:
            raise PayoffError(
                f"{name}.payoff returned shape {amount.shape}; expected ({n},) paid at the last date, "
                f"({n}, {len(obs.t)}) paid at each date, or Cashflows"
            )
    bad = ~np.isfinite(amount)
    if bad.any():
        rows = np.flatnonzero(bad.reshape(n, -1).any(axis=1))
        raise PayoffError(
            f"{name}.payoff returned NaN or inf on {rows.size} of {n} paths (first at path {rows[0]})"
        )
    if leg.product.nonnegative and amount.min(initial=0.0) < -1e-12:
        rows = np.flatnonzero((amount < -1e-12).reshape(n, -1).any(axis=1))
        raise PayoffError(
            f"{name} pays a negative amount ({amount.min():.6g}) on {rows.size} of {n} paths; "
            "an option cannot (set nonnegative = False on products that can)"
        )
    pv = amount * disc
    return pv if pv.ndim == 1 else pv.sum(axis=1)


# ----------------------------------------------------------------------------------------
# control variates


class _Underlying(Product):
    """The underlying delivered at ``maturity`` (a prepaid forward): a generic control
    variate, worth the model's discounted forward ``S0 exp(-q T)``."""

    maturity = Param(1.0, low=0.0, low_open=True, doc="delivery date in years")

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs: Observed) -> np.ndarray:
        return obs.s[:, -1]

    def label(self) -> str:
        return f"underlying at {self.maturity:g}"


class _UnderlyingOf(Product):
    """Asset ``asset`` of a several-asset model delivered at ``maturity``."""

    multi_asset = True
    maturity = Param(1.0, low=0.0, low_open=True, doc="delivery date in years")
    asset = Param(0, low=0, integer=True, doc="which asset")
    assets = Param(2, low=1, integer=True, doc="how many assets the model has")

    @property
    def n_assets(self) -> int:  # type: ignore[override]
        return int(self.assets)

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs: Observed) -> np.ndarray:
        return obs.s[:, -1, self.asset]

    def label(self) -> str:
        return f"asset {self.asset} at {self.maturity:g}"


def _underlying_controls(product: Product, model: Model) -> list[tuple[Product, float]]:
    t = float(product.validated_dates()[-1])
    fwd = np.asarray(model.forward([t]), dtype=float).reshape(-1) * math.exp(-model.short_rate * t)
    if product.multi_asset:
        d = model.n_assets
        return [(_UnderlyingOf(maturity=t, asset=a, assets=d), float(fwd[a])) for a in range(d)]
    return [(_Underlying(maturity=t), float(fwd[0]))]


def gather_controls(products: Sequence[Product], model: Model) -> tuple[list[tuple[Product, float]], list[str]]:
    """Control variates for ``products`` under ``model``: each product's own
    :meth:`~limitcase.product.Product.control_variates`, then the discounted underlying at
    its last date. Duplicates are dropped. Returns ``(controls, notes)``; a hook that raises
    or returns a non-finite price is noted and skipped (it is not what the check tests)."""
    out: list[tuple[Product, float]] = []
    seen: set = set()
    notes: list[str] = []

    def add(p: Product, exact: float) -> None:
        tag = (type(p), tuple(sorted((k, repr(v)) for k, v in p.params().items())))
        if tag not in seen:
            seen.add(tag)
            out.append((p, exact))

    for prod in products:
        try:
            own = list(prod.control_variates(model))
            for item in own:
                ctrl, exact = item
                if not isinstance(ctrl, Product):
                    raise TypeError(f"{ctrl!r} is not a Product")
                exact = float(exact)
                if not math.isfinite(exact):
                    raise ValueError(f"exact price {exact!r} is not finite")
                if ctrl.early_exercise:
                    raise ValueError(f"{ctrl.label()} has early exercise; a control needs an exact price")
                add(ctrl, exact)
        except Exception as exc:
            notes.append(f"{type(prod).__name__}.control_variates skipped: {type(exc).__name__}: {exc}")
        try:
            for ctrl, exact in _underlying_controls(prod, model):
                add(ctrl, exact)
        except LimitcaseError as exc:
            notes.append(f"no underlying control for {type(prod).__name__}: {exc}")
    return out, notes


# ----------------------------------------------------------------------------------------
# the driver


def _check_rules(results: list[PathRuleResult], x: np.ndarray, offset: int) -> None:
    for res in results:
        w = np.asarray(res.rule.weights, dtype=float)
        r = x @ w
        tol = res.rule.atol + res.rule.rtol * (np.abs(x) @ np.abs(w))
        if res.rule.sense == "==":
            excess = np.abs(r) - tol
        elif res.rule.sense == ">=":
            excess = -r - tol
        else:
            excess = r - tol
        bad = excess > 0
        if bad.any():
            j = int(np.argmax(excess))
            res.merge(int(bad.sum()), float(np.abs(r[j])), offset + j)


def grid_of(products: Sequence[Product]) -> np.ndarray:
    """The union of the products' observation dates."""
    return np.unique(np.concatenate([p.validated_dates() for p in products]))


@dataclass(frozen=True)
class Setup:
    """What a case needs before its pricing blocks, computed once (in any process) and
    shipped to the others: Longstaff-Schwartz policies, the control-variate pilot."""

    policies: tuple[Any, ...]
    pilot_cov: np.ndarray | None = None


@dataclass(frozen=True)
class BlockResult:
    """One block's summary: its statistics for the sampler's accumulator, and, per path
    rule, ``(violations, worst residual, worst path)``."""

    block: int
    size: int
    summary: Any
    rules: tuple[tuple[int, float, int], ...]


class Case:
    """Products on their common grid under one model, with their streams and sampler: the
    unit the suite schedules. ``setup()`` once, then ``blocks()`` in any process, then an
    :class:`Accumulator` combines the :class:`BlockResult` records in block order."""

    def __init__(
        self,
        products: Sequence[Product],
        model: Model,
        *,
        seed: None | int | np.random.SeedSequence = None,
        key: int = 0,
        rules: Sequence[PathRule] = (),
        method: str | MethodSpec = "plain",
        controls: Sequence[tuple[Product, float]] | None = None,
        sampler: Any = None,
        regression_paths: int = DEFAULT_REGRESSION_PATHS,
        warn: bool = True,
    ) -> None:
        self.seed = coerce_seed(seed)
        self.key = int(key)
        self.model = model
        self.products = list(products)
        if not self.products:
            raise ParamError("no products to price; give at least one")
        self.n_legs = len(self.products)
        self.rules = tuple(rules)
        for rule in self.rules:
            if len(rule.weights) != self.n_legs:
                raise ParamError(f"path rule with {len(rule.weights)} weights for {self.n_legs} legs")
        self.regression_paths = int(regression_paths)
        k = model.normals_per_step()
        base_grid = grid_of(self.products)
        notes: list[str] = []
        if sampler is not None:
            spec, more = (parse_control(method), ())
        else:
            spec, more = resolve_method(method, k, len(base_grid), warn=warn)
        notes.extend(more)
        ctrl: list[tuple[Product, float]] = []
        if spec.control:
            if controls is None:
                ctrl, more2 = gather_controls(self.products, model)
                notes.extend(more2)
            else:
                ctrl = [(p, float(v)) for p, v in controls]
        self.controls = ctrl
        everything = self.products + [p for p, _ in ctrl]
        self.grid = grid_of(everything)
        if sampler is None and spec.base == "sobol" and len(self.grid) != len(base_grid):
            spec2, more3 = resolve_method(spec, k, len(self.grid), warn=warn)
            spec = spec2
            notes.extend(more3)
        self.legs = [_Leg(p, self.grid, model) for p in everything]
        self.k = k
        self.sampler: Sampler = make_sampler(spec, self.grid, k, self.seed, sampler)
        name = self.sampler.method
        if spec.control and ctrl:
            name = "control" if name == "plain" else f"control+{name}"
        self.method = name
        self.notes = tuple(notes)
        self.early = any(leg.product.early_exercise for leg in self.legs)

    # -- sizes ---------------------------------------------------------------------------
    def round_paths(self, paths: int) -> int:
        """The path count simulated for a request (even for antithetic pairs, a multiple of
        the scrambles for Sobol points)."""
        return self.sampler.round_paths(int(paths))

    @staticmethod
    def blocks_for(paths: int) -> int:
        return -(-int(paths) // BLOCK)

    # -- setup ---------------------------------------------------------------------------
    def setup(self) -> Setup:
        """Fit Longstaff-Schwartz policies on their pilot and, with control variates, the
        covariances on the control pilot (both on streams of their own)."""
        policies: list[Any] = [None] * len(self.legs)
        rate = self.model.short_rate
        if self.early:
            from .exercise import fit_policy

            pilot_sim = _simulate_blocks(self.model, self.grid, self.regression_paths, self.seed, self.key, 0,
                                         self.k, _plain_normals)
            pilot_u: list[np.ndarray] = []
            seed, key = self.seed, self.key

            def pilot_uniforms() -> np.ndarray:
                if not pilot_u:
                    g = block_generator(seed, key, 2, 0)
                    pilot_u.append(g.random(pilot_sim.s.shape))
                return pilot_u[0]

            for i, leg in enumerate(self.legs):
                if leg.product.early_exercise:
                    policies[i] = fit_policy(leg.product, leg.observe(pilot_sim, rate, pilot_uniforms), rate)
        pilot_cov = None
        if self.controls:
            from .sampling import MomentAccumulator, moment_summary

            acc = MomentAccumulator()
            buf = self._buffer()
            for b in range(CONTROL_PILOT_BLOCKS):
                g = block_generator(self.seed, self.key, 3, b)
                z = buf[:BLOCK]
                g.standard_normal(out=z)
                x = self._values(policies, z, g)
                acc.add(moment_summary(x, x.shape[0]))
            m = acc.result()
            pilot_cov = m.cov  # per path
        return Setup(tuple(policies), pilot_cov)

    # -- blocks --------------------------------------------------------------------------
    def _buffer(self, size: int = BLOCK) -> np.ndarray:
        return np.empty((size, len(self.grid), self.k))

    def _values(self, policies: Sequence[Any], z: np.ndarray, g: np.random.Generator) -> np.ndarray:
        sim = self.model.simulate(self.grid, z, g)
        rate = self.model.short_rate
        size = z.shape[0]
        shared: list[np.ndarray] = []
        n_grid = len(self.grid)

        def uniforms() -> np.ndarray:  # drawn once per block, on first use, for every leg
            if not shared:
                shared.append(g.random((size, n_grid, sim.s.shape[2])))
            return shared[0]

        x = np.empty((size, len(self.legs)))
        for i, leg in enumerate(self.legs):
            x[:, i] = _present_values(leg, leg.observe(sim, rate, uniforms), rate, policies[i])
        return x

    def blocks(self, setup: Setup, first: int, last: int, paths: int,
               buffer: np.ndarray | None = None) -> list[BlockResult]:
        """Blocks ``first .. last - 1`` of a run of ``paths`` paths (already rounded)."""
        buf = buffer if buffer is not None else self._buffer(min(BLOCK, paths))
        out = []
        self.sampler.prepare(first, last, paths)
        for b in range(first, last):
            size = min(BLOCK, paths - b * BLOCK)
            if size <= 0:
                break
            g = block_generator(self.seed, self.key, 1, b)
            z = buf[:size]
            self.sampler.draw(g, z, b)
            x = self._values(setup.policies, z, g)
            tallies: tuple[tuple[int, float, int], ...] = ()
            if self.rules:
                res = [PathRuleResult(rule) for rule in self.rules]
                _check_rules(res, x[:, : self.n_legs], b * BLOCK)
                tallies = tuple((r.violations, r.worst, r.worst_path) for r in res)
            out.append(BlockResult(b, size, self.sampler.summarise(x, b), tallies))
        return out

    def accumulator(self) -> "Accumulator":
        return Accumulator(self)


class Accumulator:
    """Combines a case's :class:`BlockResult` records, strictly in block order."""

    def __init__(self, case: Case) -> None:
        self.case = case
        self.stats = case.sampler.accumulator()
        self.rules = [PathRuleResult(rule) for rule in case.rules]
        self.next_block = 0
        self.paths = 0

    def add(self, result: BlockResult) -> None:
        if result.block != self.next_block:
            raise RuntimeError(f"block {result.block} arrived where block {self.next_block} was due")
        self.stats.add(result.summary)
        for r, (v, worst, where) in zip(self.rules, result.rules):
            r.merge(v, worst, where)
        self.next_block += 1
        self.paths += result.size

    def joint(self, setup: Setup) -> Joint:
        m: Moments = self.stats.result()
        k = self.case.n_legs
        full = m.cov
        rules = [PathRuleResult(r.rule, r.violations, r.worst, r.worst_path) for r in self.rules]
        if self.case.controls:
            return Joint(
                paths=m.paths, mean=m.mean[:k].copy(), cov=full[:k, :k].copy(), rules=rules,
                method=self.case.method, dof=m.dof,
                controls=tuple(p.label() for p, _ in self.case.controls),
                control_mean=m.mean[k:].copy(),
                control_exact=np.array([v for _, v in self.case.controls]),
                full_cov=full, pilot_cov=setup.pilot_cov, notes=self.case.notes,
                control_min_r2=SOBOL_CONTROL_R2 if self.case.sampler.method == "sobol" else 0.0,
            )
        return Joint(paths=m.paths, mean=m.mean, cov=full, rules=rules, method=self.case.method,
                     dof=m.dof, notes=self.case.notes)


def parse_control(method: str | MethodSpec) -> MethodSpec:
    """With an explicit sampler, only the control part of ``method`` matters."""
    from .sampling import parse_method

    spec = parse_method(method)
    return MethodSpec("plain", True if spec is None else spec.control)


def evaluate(
    products: Sequence[Product],
    model: Model,
    *,
    paths: int,
    seed: None | int | np.random.SeedSequence = None,
    key: int = 0,
    rules: Sequence[PathRule] = (),
    batch: int = DEFAULT_BATCH,
    regression_paths: int = DEFAULT_REGRESSION_PATHS,
    sampler: Any = None,
    on_batch: Callable[[int], None] | None = None,
    method: str | MethodSpec = "plain",
    controls: Sequence[tuple[Product, float]] | None = None,
) -> Joint:
    """Price several products on common paths; return their joint statistics.

    Parameters
    ----------
    products
        The legs of a case. They share every path (common random numbers).
    model
        The model simulated on the union of the products' dates.
    paths
        Number of pricing paths (rounded up to an even number for antithetic pairs and to
        a multiple of the scrambles for Sobol points; ``Joint.paths`` says how many).
    seed, key
        The run's seed and the case's stream key (see :func:`case_key`).
    rules
        Path-by-path identities to verify on every path.
    batch
        Paths between progress reports (rounded up to whole blocks); blocks of
        :data:`BLOCK` paths are simulated one at a time, so neither this nor the
        path count changes the memory bound or the numbers.
    regression_paths
        Pilot paths, from their own streams, on which Longstaff-Schwartz policies are fitted
        for products with early exercise (so the policy never sees the pricing paths).
    sampler
        Source of the normals, overriding the one ``method`` names: a
        :class:`limitcase.sampling.Sampler` or a function ``draw(g, z, block)``.
    on_batch
        Called with the number of paths done after every batch (progress).
    method
        One of :data:`limitcase.sampling.METHODS`: ``"plain"`` (default), ``"antithetic"``,
        ``"sobol"``, ``"control"`` and their combinations, or ``"auto"``.
    controls
        With a ``control`` method: ``((product, exact_price), ...)`` to use instead of the
        ones gathered from the products (:func:`gather_controls`).

    Returns
    -------
    Joint
        Means, covariances, path-rule tallies and the method used; ``Joint.estimate(w)``
        gives ``sum(w_i * price_i)`` with its standard error.
    """
    if not isinstance(paths, (int, np.integer)) or isinstance(paths, bool) or paths < 2:
        raise ParamError(f"paths={paths!r} must be an integer >= 2")
    case = Case(products, model, seed=seed, key=key, rules=rules, method=method, controls=controls,
                sampler=sampler, regression_paths=regression_paths)
    setup = case.setup()
    n = case.round_paths(int(paths))
    blocks = case.blocks_for(n)
    per_batch = max(1, -(-int(batch) // BLOCK))
    acc = case.accumulator()
    buf = case._buffer(min(BLOCK, n))
    for b0 in range(0, blocks, per_batch):
        for res in case.blocks(setup, b0, min(blocks, b0 + per_batch), n, buf):
            acc.add(res)
        if on_batch is not None:
            on_batch(acc.paths)
    return acc.joint(setup)


def _plain_normals(g: np.random.Generator, out: np.ndarray, block: int) -> None:
    g.standard_normal(out=out)


_plain_normals.method = "plain"  # type: ignore[attr-defined]


def _simulate_blocks(
    model: Model, grid: np.ndarray, n: int, seed: np.random.SeedSequence, key: int, role: int, k: int, draw: Any
) -> Simulated:
    z = np.empty((n, len(grid), k))
    blocks = -(-n // BLOCK)
    g0 = None
    for b in range(blocks):
        g = block_generator(seed, key, role, b)
        g0 = g0 or g
        draw(g, z[b * BLOCK : min(n, (b + 1) * BLOCK)], b)
    return model.simulate(grid, z, g0)


def price(
    product: Product,
    model: Model | None = None,
    *,
    paths: int = 100_000,
    seed: None | int | np.random.SeedSequence = None,
    **kwargs: Any,
) -> Estimate:
    """Monte Carlo price of one product: ``Estimate(value, stderr, paths)``.

    ``model`` defaults to the product's own scenario. Other keywords go to :func:`evaluate`
    (``method="auto"`` for variance reduction).
    """
    model = product.scenario() if model is None else model
    joint = evaluate([product], model, paths=paths, seed=seed, **kwargs)
    return joint.estimate([1.0])
