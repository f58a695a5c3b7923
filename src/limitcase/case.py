"""A case: products on their common grid under one model, with their streams and sampler;
the unit the suite schedules and :func:`limitcase.engine.evaluate` runs.

``Case.setup()`` fits what the pricing blocks need (Longstaff-Schwartz policies on the
regression pilot, control-variate coefficients on the control pilot, each on streams of
their own); ``Case.blocks()`` prices a range of blocks in any process; an
:class:`Accumulator` combines the :class:`BlockResult` records strictly in block order, so
the numbers do not depend on who computed which block (see :mod:`limitcase.streams`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Sequence

import numpy as np

from .checks import PathRule, PathRuleResult
from .controls import CONTROL_PILOT_BLOCKS, SOBOL_CONTROL_R2, gather_controls
from .errors import ParamError
from .estimates import Joint
from .exercise import fit_policy
from .legs import Leg, grid_of, present_values
from .models.base import Model, Simulated
from .moments import MomentAccumulator, Moments, moment_summary
from .product import Product
from .sampling import MethodSpec, Sampler, block_rows, make_sampler, normals_buffer, parse_method, resolve_method
from .settings import CASE_WORDS_PER_DATE, DEFAULT_REGRESSION_PATHS, ENGINE_METHOD, MAX_CASE_BYTES
from .streams import (
    BLOCK,
    ROLE_CONTROL_PILOT,
    ROLE_PATHS,
    ROLE_PILOT_UNIFORMS,
    ROLE_REGRESSION_PILOT,
    block_generator,
    blocks_for,
    coerce_seed,
)

__all__ = ["Case", "Setup", "BlockResult", "Accumulator", "parse_control", "case_bytes"]


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


@dataclass(frozen=True)
class Setup:
    """What a case needs before its pricing blocks, computed once (in any process) and
    shipped to the others: Longstaff-Schwartz policies, the control-variate pilot."""

    policies: tuple[Any, ...]
    pilot_cov: np.ndarray | None = None


@dataclass(frozen=True)
class BlockResult:
    """One block's summary: its statistics for the sampler's accumulator, per path rule
    ``(violations, worst residual, worst path)``, and per leg the number of paths on which it
    pays something (the statistical comparison's validity rule reads them:
    :func:`limitcase.verdict.normal_approximation`)."""

    block: int
    size: int
    summary: Any
    rules: tuple[tuple[int, float, int], ...]
    paying: tuple[int, ...] = ()


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
        method: str | MethodSpec = ENGINE_METHOD,
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
        _check_memory(self.products, self.grid, k, model.n_assets, self.regression_paths)
        self.legs = [Leg(p, self.grid, model) for p in everything]
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
        """How many blocks of :data:`~limitcase.streams.BLOCK` paths hold ``paths``."""
        return blocks_for(paths)

    # -- setup ---------------------------------------------------------------------------
    def setup(self) -> Setup:
        """Fit Longstaff-Schwartz policies on their pilot and, with control variates, the
        covariances on the control pilot (both on streams of their own)."""
        policies: list[Any] = [None] * len(self.legs)
        if self.early:
            pilot = self.pilot()
            for i, leg in enumerate(self.legs):
                if leg.product.early_exercise:
                    policies[i] = self.fit(leg, pilot)
        pilot_cov = None
        if self.controls:
            acc = MomentAccumulator()
            buf = self.buffer()
            for b in range(CONTROL_PILOT_BLOCKS):
                g = block_generator(self.seed, self.key, ROLE_CONTROL_PILOT, b)
                z = block_rows(buf, BLOCK)
                g.standard_normal(out=z)
                x = self._values(policies, z, g)
                acc.add(moment_summary(x, x.shape[0]))
            m = acc.result()
            pilot_cov = m.cov  # per path
        return Setup(tuple(policies), pilot_cov)

    def pilot(self) -> tuple[Simulated, Callable[[], np.ndarray]]:
        """The Longstaff-Schwartz regression pilot: its simulated paths (streams of their
        own) and the function giving its uniforms (drawn once, on first use)."""
        pilot_sim = _simulate_blocks(self.model, self.grid, self.regression_paths, self.seed, self.key,
                                     ROLE_REGRESSION_PILOT, self.k, _plain_normals)
        pilot_u: list[np.ndarray] = []
        seed, key = self.seed, self.key

        def pilot_uniforms() -> np.ndarray:
            if not pilot_u:
                g = block_generator(seed, key, ROLE_PILOT_UNIFORMS, 0)
                pilot_u.append(g.random(pilot_sim.s.shape))
            return pilot_u[0]

        return pilot_sim, pilot_uniforms

    def fit(self, leg: Leg, pilot: tuple[Simulated, Callable[[], np.ndarray]]) -> Any:
        """The exercise policy of an early-exercise ``leg`` fitted on ``pilot`` (:meth:`pilot`)."""
        rate = self.model.short_rate
        return fit_policy(leg.product, leg.observe(pilot[0], rate, pilot[1]), rate)

    # -- blocks --------------------------------------------------------------------------
    def buffer(self, size: int = BLOCK) -> np.ndarray:
        """A normals buffer for blocks of up to ``size`` paths, to reuse across blocks
        (``(size, dates, k)`` laid out dates first: :func:`~limitcase.sampling.normals_buffer`)."""
        return normals_buffer(size, len(self.grid), self.k)

    _buffer = buffer  # the name before the engine was split

    def _simulate(self, z: np.ndarray, g: np.random.Generator) -> tuple[Simulated, Callable[[], np.ndarray]]:
        """The model's paths from the normals ``z`` (and whatever else the model draws from
        ``g``), with the function giving the block's uniforms: drawn from ``g`` once, on
        first use, after the model's own draws, for every leg."""
        sim = self.model.simulate(self.grid, z, g)
        size = z.shape[0]
        shared: list[np.ndarray] = []
        n_grid = len(self.grid)

        def uniforms() -> np.ndarray:
            if not shared:
                shared.append(g.random((size, n_grid, sim.s.shape[2])))
            return shared[0]

        return sim, uniforms

    def simulated(self, b: int, size: int, buffer: np.ndarray | None = None
                  ) -> tuple[Simulated, Callable[[], np.ndarray]]:
        """Block ``b`` of the pricing paths (``size`` paths; normals drawn into ``buffer``,
        a fresh one by default): what every leg of the block observes, for a caller that
        prices further products on the same paths (the mutation run's comparisons). The
        sampler must have been prepared for the run (:meth:`blocks` does it)."""
        buf = buffer if buffer is not None else self.buffer(size)
        g = block_generator(self.seed, self.key, ROLE_PATHS, b)
        z = block_rows(buf, size)
        self.sampler.draw(g, z, b)
        return self._simulate(z, g)

    def present(self, policies: Sequence[Any], sim: Simulated, uniforms: Callable[[], np.ndarray],
                legs: Sequence[int] | None = None) -> np.ndarray:
        """Present values per path of the legs ``legs`` (default: every leg, controls
        included) on simulated paths: shape ``(paths, len(legs))``."""
        rate = self.model.short_rate
        which = range(len(self.legs)) if legs is None else legs
        x = np.empty((len(which), sim.s.shape[0])).T  # (paths, legs), each leg's values contiguous
        for j, i in enumerate(which):
            leg = self.legs[i]
            x[:, j] = present_values(leg, leg.observe(sim, rate, uniforms), rate, policies[i])
        return x

    def _values(self, policies: Sequence[Any], z: np.ndarray, g: np.random.Generator) -> np.ndarray:
        sim, uniforms = self._simulate(z, g)
        return self.present(policies, sim, uniforms)

    def blocks(self, setup: Setup, first: int, last: int, paths: int,
               buffer: np.ndarray | None = None) -> list[BlockResult]:
        """Blocks ``first .. last - 1`` of a run of ``paths`` paths (already rounded)."""
        buf = buffer if buffer is not None else self.buffer(min(BLOCK, paths))
        out = []
        self.sampler.prepare(first, last, paths)
        for b in range(first, last):
            size = min(BLOCK, paths - b * BLOCK)
            if size <= 0:
                break
            sim, uniforms = self.simulated(b, size, buf)
            out.append(self.block_result(b, self.present(setup.policies, sim, uniforms)))
        return out

    def block_result(self, b: int, x: np.ndarray) -> BlockResult:
        """Block ``b``'s summary from its present values ``x`` (paths x legs, controls
        last): the sampler's statistics, the path rules' tallies, the paying paths."""
        # the layout :meth:`present` gives (each leg's values contiguous), whoever built ``x``:
        # the sums over paths then run in the same order, so the same numbers to the last bit
        x = np.asfortranarray(x)
        tallies: tuple[tuple[int, float, int], ...] = ()
        if self.rules:
            res = [PathRuleResult(rule) for rule in self.rules]
            _check_rules(res, x[:, : self.n_legs], b * BLOCK)
            tallies = tuple((r.violations, r.worst, r.worst_path) for r in res)
        paying = tuple(int(np.count_nonzero(x[:, i])) for i in range(self.n_legs))
        return BlockResult(b, x.shape[0], self.sampler.summarise(x, b), tallies, paying)

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
        self.paying = [0] * case.n_legs

    def add(self, result: BlockResult) -> None:
        if result.block != self.next_block:
            raise RuntimeError(f"block {result.block} arrived where block {self.next_block} was due")
        self.stats.add(result.summary)
        for r, (v, worst, where) in zip(self.rules, result.rules):
            r.merge(v, worst, where)
        for i, c in enumerate(result.paying):
            self.paying[i] += c
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
                paying=tuple(self.paying),
            )
        return Joint(paths=m.paths, mean=m.mean, cov=full, rules=rules, method=self.case.method,
                     dof=m.dof, notes=self.case.notes, paying=tuple(self.paying))


def case_bytes(dates: int, k: int, assets: int, paths: int) -> int:
    """Estimated bytes of simulating ``paths`` paths on ``dates`` dates at once (the rule of
    :data:`~limitcase.settings.CASE_WORDS_PER_DATE`)."""
    return 8 * int(paths) * int(dates) * (int(k) + CASE_WORDS_PER_DATE * int(assets))


def _check_memory(products: Sequence[Product], grid: np.ndarray, k: int, assets: int, regression_paths: int) -> None:
    """Refuse, before any allocation, a case whose block (or Longstaff-Schwartz pilot) would
    need more than :data:`~limitcase.settings.MAX_CASE_BYTES`, naming the product with the
    most dates and the estimate."""
    early = any(len(p.exercise_dates()) for p in products)
    paths = max(BLOCK, regression_paths) if early else BLOCK
    need = case_bytes(len(grid), k, assets, paths)
    if need <= MAX_CASE_BYTES:
        return
    worst = max(products, key=lambda p: len(p.validated_dates()))
    n = len(worst.validated_dates())
    what = "the Longstaff-Schwartz pilot" if paths > BLOCK else "one block"
    raise ParamError(
        f"{worst.label()} has {n:,} observation dates ({len(grid):,} on the case's grid): {what} of {paths:,} "
        f"paths would need about {need / 2**30:.3g} GiB, above the limit of {MAX_CASE_BYTES / 2**30:g} GiB "
        "(limitcase.settings.MAX_CASE_BYTES); give the product fewer dates"
    )


def parse_control(method: str | MethodSpec) -> MethodSpec:
    """With an explicit sampler, only the control part of ``method`` matters."""
    spec = parse_method(method)
    return MethodSpec("plain", True if spec is None else spec.control)


def _plain_normals(g: np.random.Generator, out: np.ndarray, block: int) -> None:
    g.standard_normal(out=out)


_plain_normals.method = "plain"  # type: ignore[attr-defined]


def _simulate_blocks(
    model: Model, grid: np.ndarray, n: int, seed: np.random.SeedSequence, key: int, role: int, k: int, draw: Any
) -> Simulated:
    z = np.empty((n, len(grid), k))
    g0 = None
    for b in range(blocks_for(n)):
        g = block_generator(seed, key, role, b)
        g0 = g0 or g
        draw(g, z[b * BLOCK : min(n, (b + 1) * BLOCK)], b)
    return model.simulate(grid, z, g0)
