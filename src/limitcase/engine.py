"""Batched Monte Carlo: random streams, paths, cash flows, estimates.

Reproducibility. Paths come in fixed blocks of :data:`BLOCK` paths; block ``b`` of a case
with key ``k`` draws from its own stream ``SeedSequence(seed, spawn_key=(k, 1, b))``.
A batch is a whole number of blocks processed in one go, and the running sums are
combined block by block in block order, so the numbers do not depend on the batch size or
on how many processes share the blocks.

Memory. At most one batch of paths lives at a time: about
``batch x grid dates x normals per step x 8 bytes`` for the normals (overwritten in place by
the prices), plus what the payoffs allocate on one batch, plus, for products with early
exercise, the regression pilot (``regression_paths x grid dates``). The path count itself
never enters the bound.

Common random numbers. All products handed to :func:`evaluate` together see the same paths,
on the union of their dates; each reads its own dates only.
"""

from __future__ import annotations

import math
import zlib
from dataclasses import dataclass, field
from typing import Any, Callable, Sequence

import numpy as np

from .errors import ParamError, PayoffError
from .models.base import Model, Simulated
from .product import Cashflows, Observed, Product

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
]

BLOCK = 4096
"""Paths per random-stream block. Part of the numbers: changing it changes every result."""

DEFAULT_BATCH = BLOCK
DEFAULT_REGRESSION_PATHS = 1 << 16


@dataclass(frozen=True, slots=True)
class Estimate:
    """A Monte Carlo estimate: value, standard error and the number of paths behind it."""

    value: float
    stderr: float
    paths: int

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


@dataclass
class Joint:
    """Joint statistics of the legs' discounted cash flows over common paths."""

    paths: int
    mean: np.ndarray
    cov: np.ndarray  # sample covariance of the per-path present values
    rules: list[PathRuleResult] = field(default_factory=list)
    method: str = "plain"

    def estimate(self, weights: Sequence[float]) -> Estimate:
        """The estimate of ``sum(w_i * price_i)`` with its standard error (covariances
        included: common random numbers make differences precise)."""
        w = np.asarray(weights, dtype=float)
        value = float(w @ self.mean)
        var = float(w @ self.cov @ w)
        se = math.sqrt(max(var, 0.0) / self.paths) if self.paths > 1 else math.inf
        return Estimate(value, se, self.paths)


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
        ex = np.asarray(product.exercise_dates(), dtype=float).reshape(-1)
        self.exercise_cols = np.searchsorted(self.dates, ex)
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
# the driver


class _Moments:
    """Running mean and co-moment matrix, combined block by block (Chan, Golub and
    LeVeque 1979 pairwise update), so the result depends only on the block order."""

    def __init__(self, k: int) -> None:
        self.n = 0
        self.mean = np.zeros(k)
        self.m2 = np.zeros((k, k))

    def add(self, x: np.ndarray) -> None:
        nb = x.shape[0]
        if nb == 0:
            return
        mb = x.mean(axis=0)
        d = x - mb
        m2b = np.einsum("ni,nj->ij", d, d)
        if self.n == 0:
            self.n, self.mean, self.m2 = nb, mb, m2b
            return
        n = self.n + nb
        delta = mb - self.mean
        self.mean = self.mean + delta * (nb / n)
        self.m2 = self.m2 + m2b + np.outer(delta, delta) * (self.n * nb / n)
        self.n = n

    def cov(self) -> np.ndarray:
        return self.m2 / (self.n - 1) if self.n > 1 else np.full_like(self.m2, np.inf)


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
            res.violations += int(bad.sum())
            j = int(np.argmax(excess))
            worst = float(np.abs(r[j]))
            if worst > res.worst:
                res.worst, res.worst_path = worst, offset + j


def grid_of(products: Sequence[Product]) -> np.ndarray:
    """The union of the products' observation dates."""
    return np.unique(np.concatenate([p.validated_dates() for p in products]))


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
) -> Joint:
    """Price several products on common paths; return their joint statistics.

    Parameters
    ----------
    products
        The legs of a case. They share every path (common random numbers).
    model
        The model simulated on the union of the products' dates.
    paths
        Number of pricing paths.
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
        Source of the normals; default plain pseudo-random (:class:`limitcase.sampling.Plain`
        when present, else the built-in one).
    on_batch
        Called with the number of paths done after every batch (progress).
    """
    if not isinstance(paths, (int, np.integer)) or paths < 2:
        raise ParamError(f"paths={paths!r} must be an integer >= 2")
    seed_seq = coerce_seed(seed)
    products = list(products)
    grid = grid_of(products)
    legs = [_Leg(p, grid, model) for p in products]
    rate = model.short_rate
    k_normals = model.normals_per_step()
    draw = sampler if sampler is not None else _plain_normals

    policies: list[Any] = [None] * len(legs)
    if any(leg.product.early_exercise for leg in legs):
        from .exercise import fit_policy

        pilot_sim = _simulate_blocks(model, grid, regression_paths, seed_seq, key, 0, k_normals, _plain_normals)
        pilot_u: list[np.ndarray] = []

        def pilot_uniforms() -> np.ndarray:
            if not pilot_u:
                g = block_generator(seed_seq, key, 2, 0)
                pilot_u.append(g.random(pilot_sim.s.shape))
            return pilot_u[0]

        for i, leg in enumerate(legs):
            if leg.product.early_exercise:
                policies[i] = fit_policy(leg.product, leg.observe(pilot_sim, rate, pilot_uniforms), rate)

    moments = _Moments(len(legs))
    rule_results = [PathRuleResult(rule) for rule in rules]
    blocks = -(-paths // BLOCK)
    per_batch = max(1, -(-batch // BLOCK))
    done = 0
    for b in range(blocks):
        x = _block_values(legs, model, grid, policies, seed_seq, key, b, min(BLOCK, paths - b * BLOCK), k_normals, draw)
        moments.add(x)
        _check_rules(rule_results, x, done)
        done += x.shape[0]
        if on_batch is not None and ((b + 1) % per_batch == 0 or b + 1 == blocks):
            on_batch(done)
    method = getattr(draw, "method", "plain")
    return Joint(paths=moments.n, mean=moments.mean, cov=moments.cov(), rules=rule_results, method=method)


def _block_values(
    legs: list[_Leg],
    model: Model,
    grid: np.ndarray,
    policies: list[Any],
    seed: np.random.SeedSequence,
    key: int,
    block: int,
    size: int,
    k_normals: int,
    draw: Any,
) -> np.ndarray:
    """Present values ``(size, legs)`` of block ``block``: its own stream, its own paths."""
    g = block_generator(seed, key, 1, block)
    z = np.empty((size, len(grid), k_normals))
    draw(g, z, block)
    sim = model.simulate(grid, z, g)
    rate = model.short_rate
    shared: list[np.ndarray] = []

    def uniforms() -> np.ndarray:  # drawn once per block, on first use, for every leg
        if not shared:
            shared.append(g.random((size, len(grid), sim.s.shape[2])))
        return shared[0]

    x = np.empty((size, len(legs)))
    for i, leg in enumerate(legs):
        x[:, i] = _present_values(leg, leg.observe(sim, rate, uniforms), rate, policies[i])
    return x


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

    ``model`` defaults to the product's own scenario. Other keywords go to :func:`evaluate`.
    """
    model = product.scenario() if model is None else model
    joint = evaluate([product], model, paths=paths, seed=seed, **kwargs)
    return joint.estimate([1.0])
