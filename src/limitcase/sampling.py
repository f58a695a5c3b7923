"""Where the normals come from, and the estimator that goes with each source.

The engine simulates paths in blocks of ``BLOCK`` paths (see :mod:`limitcase.streams`); a
*sampler* fills the block's normals ``z`` (shape ``(paths, dates, normals_per_step)``) and
says how the block's per-path present values become an estimate with a standard error.
The model never knows which sampler fed it.

Layout of a block (:func:`normals_buffer`). ``z`` is indexed paths first, but laid out in
memory dates first: it is the transpose of a C-contiguous ``(normals_per_step, dates,
paths)`` array (``z`` is Fortran-contiguous), so one date of one normal is a contiguous
row over the paths. A model's accumulation over the dates is then whole-row adds, and a
payoff's reductions over the dates (``obs.s.mean(axis=1)``) stream over contiguous rows;
measured on a block of 4096 paths x 52 dates (2-core machine, CPU time): the mean over
dates 0.2 ns per path-date against 0.56 paths-first. Pseudo-random normals are drawn in
memory order (normal, date, path), so the numbers of a block depend on its size; the
blocks of a run, and so its result, still depend only on the seed and the path count.

Methods (``--method`` on ``check``)
-----------------------------------
``plain``
    Independent pseudo-random normals from the block's own stream; the standard error is
    the sample standard deviation over paths divided by ``sqrt(paths)``.
``antithetic``
    Each block holds pairs ``(z, -z)``: the first half of the block draws ``z``, the second
    half is its mirror image. Paths of a pair are dependent, so the standard error is
    computed over *pair means* (``paths / 2`` independent replicates), never over single
    paths. Glasserman (2004), *Monte Carlo Methods in Financial Engineering*, Section 4.2.
``sobol``
    Randomised quasi-Monte Carlo: scrambled Sobol points (:class:`scipy.stats.qmc.Sobol`,
    Owen-type linear matrix scrambling with a digital shift) mapped to normals by the
    inverse normal distribution function and to paths by a Brownian bridge, so the first
    coordinates of every point decide the coarse shape of the path (Caflisch, Morokoff and
    Owen 1997; Glasserman 2004, Sections 3.1 and 5.5). ``SCRAMBLES`` independent scrambles,
    each seeded from the run's ``SeedSequence``, give independent, unbiased estimates; the
    standard error is the standard deviation of the scramble means over
    ``sqrt(SCRAMBLES)``, with ``SCRAMBLES - 1`` degrees of freedom (the verdict then uses
    Student's t, not the normal). Applies when the model draws few normals per step
    (``normals_per_step() <= SOBOL_MAX_NORMALS_PER_STEP``); otherwise the engine falls back
    to pseudo-random normals with a :class:`SamplingWarning`.
``control``
    Control variates on top of any of the above: see :mod:`limitcase.engine` (products
    whose exact price is known are priced on the same paths; the coefficient comes from
    pilot paths of their own, so the estimate stays unbiased).
``auto``
    Control variates, with Sobol points where they apply and antithetic pairs otherwise.
    Under Sobol points a control is applied to a check's statistic only when it explains
    at least 90% of its variance on the pilot (``controls.SOBOL_CONTROL_R2``): a weak control
    can add more quasi-random error than it removes. Measured (``benchmarks/efficiency.py
    --others``): auto is the best method or within a factor 0.7 of it on an arithmetic
    Asian, a barrier, a digital, a lookback and a Bermudan.

Any randomness a model draws itself (jump counts, from the block's ``Generator``) and the
per-block uniforms products may read stay pseudo-random under every method: only the
normals change, which keeps every estimator above unbiased.

Layout of a Sobol block. With ``R = SCRAMBLES`` and ``C = BLOCK // R``, block ``b`` holds
points ``b*C ... b*C + C - 1`` of each scramble, scramble ``r`` in rows ``r*C ... r*C + C - 1``.
Adding blocks in order extends every scramble's sequence, so more blocks never change the
earlier ones, and a block's numbers depend only on the seed, the dimension and ``b``.
The scrambles depend on the run's seed and the dimension (dates x normals per step), not
on the case: cases of equal dimension share scrambles (their estimates may then be
dependent, which Holm's correction allows), and a check still reproduces on its own.
"""

from __future__ import annotations

import math
import warnings
from collections import OrderedDict, deque
from dataclasses import dataclass
from typing import Any, Callable, Sequence

import numpy as np
from scipy.special import ndtri
from scipy.stats import qmc

from .errors import ParamError
from .settings import METHODS
from .moments import MomentAccumulator, Moments, ScrambleAccumulator, moment_summary
from .streams import BLOCK, SOBOL_TAG

__all__ = [
    "METHODS",
    "SCRAMBLES",
    "SOBOL_MAX_NORMALS_PER_STEP",
    "SOBOL_MAX_DIMENSION",
    "SamplingWarning",
    "MethodSpec",
    "parse_method",
    "resolve_method",
    "sobol_obstacle",
    "Sampler",
    "Plain",
    "Antithetic",
    "SobolBridge",
    "BrownianBridge",
    "Moments",
    "MomentAccumulator",
    "ScrambleAccumulator",
    "moment_summary",
    "make_sampler",
    "as_sampler",
    "normals_buffer",
    "block_rows",
]

SCRAMBLES = 32
"""Independent scrambles of a Sobol run: the standard error has ``SCRAMBLES - 1`` degrees of freedom."""

SOBOL_MAX_NORMALS_PER_STEP = 4
"""Sobol points are used only for models drawing at most this many normals per date."""

SOBOL_MAX_DIMENSION = 21201
"""The largest dimension :class:`scipy.stats.qmc.Sobol` supports (its direction numbers)."""

SOBOL_BITS = 30
_HALF_CELL = 0.5 ** (SOBOL_BITS + 1)


class SamplingWarning(UserWarning):
    """A requested sampling method does not apply to a case; another one was used."""


# ----------------------------------------------------------------------------------------
# method names


@dataclass(frozen=True, slots=True)
class MethodSpec:
    """A resolved method: the source of normals (``base``) and whether control variates apply."""

    base: str = "plain"
    control: bool = False

    @property
    def name(self) -> str:
        if self.base == "plain":
            return "control" if self.control else "plain"
        return f"control+{self.base}" if self.control else self.base


def parse_method(name: str | MethodSpec) -> MethodSpec | None:
    """The :class:`MethodSpec` of a method name; ``None`` for ``"auto"``.

    Raises :class:`ParamError` for an unknown name, listing the known ones.
    """
    if isinstance(name, MethodSpec):
        return name
    if not isinstance(name, str) or name not in METHODS:
        raise ParamError(f"method={name!r} is not a sampling method; use one of {', '.join(METHODS)}")
    if name == "auto":
        return None
    parts = set(name.split("+"))
    control = "control" in parts
    parts.discard("control")
    base = parts.pop() if parts else "plain"
    return MethodSpec(base=base, control=control)


def sobol_obstacle(normals_per_step: int, dates: int) -> str | None:
    """Why Sobol points do not apply to a model and grid, or ``None`` when they do."""
    if normals_per_step > SOBOL_MAX_NORMALS_PER_STEP:
        return (
            f"the model draws {normals_per_step} normals per date (Sobol points are used up to "
            f"{SOBOL_MAX_NORMALS_PER_STEP})"
        )
    if normals_per_step * dates > SOBOL_MAX_DIMENSION:
        return (
            f"dimension {normals_per_step * dates} (dates x normals per date) exceeds the "
            f"{SOBOL_MAX_DIMENSION} of scipy's Sobol generator"
        )
    return None


def resolve_method(
    name: str | MethodSpec, normals_per_step: int, dates: int, *, warn: bool = True
) -> tuple[MethodSpec, tuple[str, ...]]:
    """The method actually used for a case, and notes on any substitution.

    ``auto`` becomes control variates with Sobol points where they apply, antithetic pairs
    otherwise (no warning: that is its job). An explicit ``sobol`` that does not apply falls
    back to plain pseudo-random normals with a :class:`SamplingWarning` (when ``warn``).
    """
    spec = parse_method(name)
    obstacle = sobol_obstacle(normals_per_step, dates)
    if spec is None:
        return MethodSpec("sobol" if obstacle is None else "antithetic", True), ()
    if spec.base == "sobol" and obstacle is not None:
        note = f"Sobol points not used: {obstacle}; fell back to pseudo-random normals"
        if warn:
            warnings.warn(note, SamplingWarning, stacklevel=3)
        return MethodSpec("plain", spec.control), (note,)
    return spec, ()


# ----------------------------------------------------------------------------------------
# samplers


def normals_buffer(paths: int, dates: int, k: int) -> np.ndarray:
    """A block's normals ``(paths, dates, k)``, laid out dates first (the transpose of a
    C-contiguous ``(k, dates, paths)`` array): see the module's notes on the layout."""
    return np.empty((int(k), int(dates), int(paths))).T


def block_rows(buf: np.ndarray, size: int) -> np.ndarray:
    """The first ``size`` paths of a buffer from :func:`normals_buffer`, as a buffer of the
    same layout (contiguous, so a generator can fill it); any other array: ``buf[:size]``."""
    n, m, k = buf.shape
    if size == n:
        return buf
    if buf.flags.f_contiguous and not buf.flags.c_contiguous:
        return buf.T.reshape(-1)[: k * m * size].reshape(k, m, size).T
    return buf[:size]


def _fill_normals(g: np.random.Generator, z: np.ndarray) -> None:
    """Standard normals into ``z``, in its memory order when it is contiguous."""
    if z.flags.c_contiguous or z.flags.f_contiguous:
        g.standard_normal(out=z)
    else:
        z[...] = g.standard_normal(z.shape)


class Sampler:
    """Base of the sources of normals. ``bind`` ties one to a case (grid, normals per step,
    seed); the bound sampler fills blocks, summarises their present values and makes the
    accumulator that turns the summaries into :class:`Moments`.

    How to subclass: set ``method``, fill ``draw(g, z, block)`` (``z`` is the block's
    ``(paths, dates, normals_per_step)`` array, laid out dates first: write it by indexing or
    ``out=``, never through a reshape, which is a copy on that layout; ``g`` the block's
    generator), and override
    ``round_paths``, ``summarise`` and ``accumulator`` when paths are not independent.
    """

    method: str = "plain"

    def bind(self, times: np.ndarray, normals_per_step: int, seed: np.random.SeedSequence) -> "Sampler":
        return self

    def round_paths(self, paths: int) -> int:
        """The path count actually simulated for a request of ``paths``."""
        return paths

    def draw(self, g: np.random.Generator, z: np.ndarray, block: int) -> None:
        raise NotImplementedError

    def prepare(self, first: int, last: int, paths: int) -> None:
        """Hook: blocks ``first .. last - 1`` of a run of ``paths`` paths are about to be
        drawn, in order (a sampler may make them together). Default: nothing."""

    def summarise(self, x: np.ndarray, block: int) -> Any:
        return moment_summary(x, x.shape[0])

    def accumulator(self) -> Any:
        return MomentAccumulator()


class Plain(Sampler):
    """Independent pseudo-random normals from each block's own stream."""

    method = "plain"

    def draw(self, g: np.random.Generator, z: np.ndarray, block: int) -> None:
        _fill_normals(g, z)


class _Custom(Sampler):
    """A plain function ``draw(g, z, block)`` used as a sampler (independent paths)."""

    def __init__(self, fn: Callable[[np.random.Generator, np.ndarray, int], None]) -> None:
        self.fn = fn
        self.method = str(getattr(fn, "method", "custom"))

    def draw(self, g: np.random.Generator, z: np.ndarray, block: int) -> None:
        # a user's function gets a C-contiguous block, as before the engine laid blocks out
        # dates first: a write through a reshape of it (a copy on the other layout) still lands
        if z.flags.c_contiguous:
            self.fn(g, z, block)
            return
        tmp = np.empty(z.shape)
        self.fn(g, tmp, block)
        np.copyto(z, tmp)


def as_sampler(obj: Any) -> Sampler:
    """A :class:`Sampler` from a sampler, a method base name, or a ``draw`` function."""
    if isinstance(obj, Sampler):
        return obj
    if isinstance(obj, str):
        return {"plain": Plain, "antithetic": Antithetic, "sobol": SobolBridge}[obj]()
    if callable(obj):
        return _Custom(obj)
    raise ParamError(f"sampler={obj!r} is neither a Sampler nor a function draw(g, z, block)")


class Antithetic(Sampler):
    """Pairs ``(z, -z)``: rows ``0..h-1`` of a block of ``2h`` paths draw ``z`` from the
    block's stream, rows ``h..2h-1`` are ``-z``. The replicates are the ``h`` pair means.

    With ``f`` the discounted payoff, ``Var[(f(z) + f(-z))/2] = Var[f] (1 + rho) / 2``,
    ``rho = Corr[f(z), f(-z)]`` (Glasserman 2004, Section 4.2): a gain for monotone payoffs,
    never worse than half the paths for any payoff, and half the normals to draw.
    """

    method = "antithetic"

    def round_paths(self, paths: int) -> int:
        return paths + (paths % 2)

    def draw(self, g: np.random.Generator, z: np.ndarray, block: int) -> None:
        h = z.shape[0] // 2
        if z.flags.f_contiguous and not z.flags.c_contiguous:  # dates first: halves of each row
            zt = z.T
            half = g.standard_normal(zt[:, :, :h].shape)
            zt[:, :, :h] = half
            np.negative(half, out=zt[:, :, h:])
            return
        _fill_normals(g, z[:h])
        np.negative(z[:h], out=z[h:])

    def summarise(self, x: np.ndarray, block: int) -> Any:
        h = x.shape[0] // 2
        u = x[:h] + x[h:]
        u *= 0.5
        return moment_summary(u, x.shape[0])


class BrownianBridge:
    r"""Brownian motion at ``times`` from standard normals taken coarse to fine.

    The first normal sets the end point, :math:`W(t_m) = \sqrt{t_m}\,Z_1`; each later one
    fills the middle index ``i`` of an interval whose ends ``l < i < r`` are known:

    .. math::

        W(t_i) = \frac{(t_r - t_i) W(t_l) + (t_i - t_l) W(t_r)}{t_r - t_l}
                 + \sqrt{\frac{(t_i - t_l)(t_r - t_i)}{t_r - t_l}}\, Z,

    with :math:`W(0) = 0` (Glasserman 2004, Section 3.1). The increments
    :math:`(W(t_j) - W(t_{j-1})) / \sqrt{t_j - t_{j-1}}` are then independent standard
    normals, whatever the normals' source: it is a change of variables, exact in law.
    """

    def __init__(self, times: Sequence[float]) -> None:
        t = np.asarray(times, dtype=float)
        m = t.size
        if m == 0 or t[0] <= 0 or np.any(np.diff(t) <= 0):
            raise ParamError(f"BrownianBridge needs increasing times > 0; got {t[:6]!r}")
        steps: list[tuple[int, int, int, float, float, float]] = [(m - 1, -1, -1, 0.0, 0.0, math.sqrt(t[-1]))]
        queue = deque([(-1, m - 1)])
        while queue:
            lo, hi = queue.popleft()
            if hi - lo < 2:
                continue
            i = (lo + hi) // 2
            tl = 0.0 if lo < 0 else float(t[lo])
            tr, ti = float(t[hi]), float(t[i])
            span = tr - tl
            steps.append((i, lo, hi, (tr - ti) / span, (ti - tl) / span, math.sqrt((ti - tl) * (tr - ti) / span)))
            queue.append((lo, i))
            queue.append((i, hi))
        self.times = t
        self.steps = steps
        self.inv_sqrt_dt = 1.0 / np.sqrt(np.diff(t, prepend=0.0))

    def increments(self, normals: np.ndarray, out: np.ndarray) -> None:
        """Normalised increments ``out`` (paths, dates, k) from ``normals`` (paths, dates, k)
        whose axis 1 is in bridge order (position 0 sets the end point)."""
        n, m, k = normals.shape
        zt = np.ascontiguousarray(normals.transpose(1, 0, 2))  # (positions, paths, k): rows contiguous
        w = np.empty((m, n, k))
        tmp = np.empty((n, k))
        for p, (i, lo, hi, a, b, s) in enumerate(self.steps):
            wi = w[i]
            np.multiply(zt[p], s, out=wi)
            if hi >= 0:
                np.multiply(w[hi], b, out=tmp)
                wi += tmp
            if lo >= 0:
                np.multiply(w[lo], a, out=tmp)
                wi += tmp
        ot = out.transpose(1, 0, 2)
        np.subtract(w[1:], w[:-1], out=ot[1:])
        ot[0] = w[0]
        ot *= self.inv_sqrt_dt[:, None, None]


_ENGINES: dict[tuple, list] = {}
_ENGINE_CACHE_LIMIT = 4096

BLOCK_CACHE_BYTES = 64 << 20
"""Sobol blocks kept per process for reuse. Cases on the same grid with the same number of
normals per date use the very same normals (the scrambles depend on the seed and the
dimension only), so the second case onwards copies them instead of generating, inverting
and bridging them again. Least recently used blocks go first; the budget is fixed, so the
memory bound does not grow with the path count."""
_BLOCKS: "OrderedDict[tuple, np.ndarray]" = OrderedDict()
_BLOCK_BYTES = [0]


def _remember(tag: tuple, z: np.ndarray) -> None:
    if z.nbytes > BLOCK_CACHE_BYTES // 8:
        return
    while _BLOCKS and _BLOCK_BYTES[0] + z.nbytes > BLOCK_CACHE_BYTES:
        _, old = _BLOCKS.popitem(last=False)
        _BLOCK_BYTES[0] -= old.nbytes
    keep = z.copy(order="K")  # the block's layout (dates first), so a hit is a straight copy
    keep.flags.writeable = False
    _BLOCKS[tag] = keep
    _BLOCK_BYTES[0] += keep.nbytes


def _sobol_engine(seed: np.random.SeedSequence, dim: int, r: int, position: int) -> Any:
    """Scramble ``r`` of dimension ``dim``, positioned at point ``position`` (cached per
    process; scipy's generator is sequential, so a jump back resets and fast-forwards)."""
    tag = (seed.entropy, tuple(seed.spawn_key), dim, r)
    entry = _ENGINES.get(tag)
    if entry is None:
        if len(_ENGINES) >= _ENGINE_CACHE_LIMIT:
            _ENGINES.clear()
        ss = np.random.SeedSequence(seed.entropy, spawn_key=tuple(seed.spawn_key) + (SOBOL_TAG, 0, dim, r))
        # a 128-bit integer drawn from the scramble's SeedSequence (scipy seeds its own PCG64
        # from it; cheaper than handing over a Generator, which scipy deep-copies)
        words = ss.generate_state(4, np.uint32)
        eng = qmc.Sobol(dim, scramble=True, bits=SOBOL_BITS, rng=int.from_bytes(words.tobytes(), "little"))
        entry = _ENGINES[tag] = [eng, 0]
    eng, pos = entry
    if pos != position:
        if pos > position:
            eng.reset()
            pos = 0
        if position > pos:
            eng.fast_forward(position - pos)
        entry[1] = position
    return entry


class SobolBridge(Sampler):
    """Scrambled Sobol points through the inverse normal and a Brownian bridge, in
    ``scrambles`` independent randomisations (see the module docstring for the layout).

    Coordinate ``p * k + f`` of a point (``k`` normals per date) drives bridge position
    ``p`` of factor ``f``: the most important coordinates (the end point, then the middle,
    ...) come first, where Sobol points are most uniform.
    """

    method = "sobol"

    def __init__(self, scrambles: int = SCRAMBLES, block: int | None = None) -> None:
        if scrambles < 2:
            raise ParamError(f"scrambles={scrambles!r} must be >= 2 (the standard error needs two)")
        self.scrambles = int(scrambles)
        self.block = block
        self.seed: np.random.SeedSequence | None = None
        self.bridge: BrownianBridge | None = None
        self.k = 1

    def bind(self, times: np.ndarray, normals_per_step: int, seed: np.random.SeedSequence) -> "SobolBridge":
        block = self.block or BLOCK
        if block % self.scrambles:
            raise ParamError(f"scrambles={self.scrambles!r} must divide the block size {block}")
        bound = SobolBridge(self.scrambles, block)
        bound.seed = seed
        bound.bridge = BrownianBridge(times)
        bound.k = int(normals_per_step)
        obstacle = sobol_obstacle(bound.k, len(times))
        if obstacle is not None:
            raise ParamError(f"Sobol points do not apply: {obstacle}")
        return bound

    @property
    def dimension(self) -> int:
        assert self.bridge is not None
        return len(self.bridge.times) * self.k

    def round_paths(self, paths: int) -> int:
        r = self.scrambles
        return -(-paths // r) * r

    def _tag(self, block: int, n: int) -> tuple:
        assert self.seed is not None and self.bridge is not None
        return (self.seed.entropy, tuple(self.seed.spawn_key), self.bridge.times.tobytes(), self.k,
                self.scrambles, self.block, block, n)

    def prepare(self, first: int, last: int, paths: int) -> None:
        """Make the full blocks ``first .. last - 1`` at once, a few at a time: one call per
        scramble for several blocks, and the bridge over all of them together, instead of
        per block (the cost of a block of few dates is mostly per-call overhead). They go to
        the block cache, where :meth:`draw` finds them; the numbers are those of ``draw``."""
        assert self.seed is not None and self.bridge is not None and self.block is not None
        n = self.block
        m, k = len(self.bridge.times), self.k
        dim = m * k
        per_block = n * dim * 8
        if per_block * 2 > BLOCK_CACHE_BYTES // 4:
            return
        full_last = min(last, paths // n)
        todo = [b for b in range(first, full_last) if self._tag(b, n) not in _BLOCKS]
        if len(todo) < 2:
            return
        step = max(1, min(64, (BLOCK_CACHE_BYTES // 4) // per_block))
        r_count = self.scrambles
        c = n // r_count
        runs: list[list[int]] = []
        for b in todo:  # consecutive runs of blocks, each from one position per scramble
            if runs and b == runs[-1][-1] + 1 and len(runs[-1]) < step:
                runs[-1].append(b)
            else:
                runs.append([b])
        for run in runs:
            count = len(run)
            u = np.empty((count, r_count, c, dim))
            with warnings.catch_warnings():
                # scipy's note on balance at counts that are not powers of 2: the estimate
                # stays unbiased at any count, and a run's count is whole blocks
                warnings.filterwarnings("ignore", message="The balance properties", category=UserWarning)
                for r in range(r_count):
                    entry = _sobol_engine(self.seed, dim, r, run[0] * c)
                    u[:, r] = entry[0].random(count * c).reshape(count, c, dim)
                    entry[1] += count * c
            u = u.reshape(count * n, dim)
            u += _HALF_CELL
            ndtri(u, out=u)
            z = normals_buffer(count * n, m, k)
            if m == 1:
                z[...] = u.reshape(count * n, 1, k)
            else:
                self.bridge.increments(u.reshape(count * n, m, k), z)
            for i, b in enumerate(run):
                _remember(self._tag(b, n), z[i * n : (i + 1) * n])

    def draw(self, g: np.random.Generator, z: np.ndarray, block: int) -> None:
        assert self.seed is not None and self.bridge is not None and self.block is not None
        n, m, k = z.shape
        tag = self._tag(block, n)
        hit = _BLOCKS.get(tag)
        if hit is not None:  # another case on the same grid drew this block already
            _BLOCKS.move_to_end(tag)
            np.copyto(z, hit)
            return
        r_count = self.scrambles
        c = n // r_count
        chunk = self.block // r_count
        dim = m * k
        u = np.empty((n, dim))
        with warnings.catch_warnings():  # scipy's note on balance at counts not powers of 2 (see above)
            warnings.filterwarnings("ignore", message="The balance properties", category=UserWarning)
            for r in range(r_count):
                entry = _sobol_engine(self.seed, dim, r, block * chunk)
                u[r * c : (r + 1) * c] = entry[0].random(c)
                entry[1] += c
        u += _HALF_CELL  # cell midpoints: strictly inside (0, 1), so the inverse stays finite
        ndtri(u, out=u)
        if m == 1:  # one date: the bridge is the identity
            z[...] = u.reshape(n, 1, k)
        else:
            self.bridge.increments(u.reshape(n, m, k), z)
        _remember(tag, z)

    def summarise(self, x: np.ndarray, block: int) -> Any:
        r_count = self.scrambles
        c = x.shape[0] // r_count
        sums = x.reshape(r_count, c, x.shape[1]).sum(axis=1)
        return np.full(r_count, c, dtype=np.int64), sums

    def accumulator(self) -> Any:
        return ScrambleAccumulator(self.scrambles)


def make_sampler(spec: MethodSpec, times: np.ndarray, normals_per_step: int, seed: np.random.SeedSequence,
                 override: Any = None) -> Sampler:
    """The bound sampler of a case: ``override`` (a sampler or draw function) if given, else
    the one named by ``spec.base``."""
    base = as_sampler(override) if override is not None else as_sampler(spec.base)
    return base.bind(np.asarray(times, dtype=float), normals_per_step, seed)
