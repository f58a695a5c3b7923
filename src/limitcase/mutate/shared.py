"""Paths shared by the mutants of one point: a comparison simulates a point's paths and prices
the original on them once per process, then prices only the mutant.

Part of :mod:`limitcase.mutate` (the package docstring describes the method).

Why. Every mutant of a product is compared with its original at the same points, on the
same streams (the stream key names the product and the point, not the mutant): the same
normals, the same simulated paths, the same uniforms, the same present values of the
original, recomputed for each of its mutants. Drawing and simulating were about a quarter
of the comparison's CPU time and the original's present values about another third.

The argument. A comparison's result is a function of the point's simulated paths, the
original's present values on them and the mutant's. The first two do not depend on the
mutant; kept from the first comparison at a point and reused, with the mutant priced
afresh, every present value, every path-rule tally and every moment is the one a fresh
joint run of ``[mutant, original]`` gives, bit for bit (the same :class:`~limitcase.case.Case`
builds the block results; ``tests/mutate/test_shared_paths.py``).

What is kept, per point, is bounded by :data:`~limitcase.settings.MUTATE_SHARED_PATHS_BYTES`
per process (the oldest points are dropped first); a point larger than it is not kept.
"""

from __future__ import annotations

import collections
import hashlib
import pickle
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from ..case import Case, Setup
from ..checks import PathRule
from ..estimates import Joint
from ..legs import Leg
from ..models.base import Model, Simulated
from ..product import Product
from ..settings import MUTATE_SHARED_PATHS_BYTES
from ..streams import BLOCK

__all__ = ["joint_with_original", "clear_shared"]


@dataclass
class _Point:
    """A point's paths and the original's present values on them (this process)."""

    blocks: list[tuple[Simulated, Callable[[], np.ndarray]]]
    original: list[np.ndarray]
    policy: Any
    pilot: tuple[Simulated, Callable[[], np.ndarray]] | None
    nbytes: int


_KEPT: "collections.OrderedDict[tuple, _Point]" = collections.OrderedDict()
_BYTES = [0]


def clear_shared() -> None:
    """Forget every kept point (this process)."""
    _KEPT.clear()
    _BYTES[0] = 0


def _state(model: Model) -> str | None:
    """A digest of the model's whole state (a label or repr may abbreviate: a correlation
    matrix, a surface); ``None`` when the model cannot be pickled (nothing is kept)."""
    try:
        return hashlib.sha256(pickle.dumps((type(model), model), protocol=pickle.HIGHEST_PROTOCOL)).hexdigest()
    except Exception:
        return None


def _arrays_bytes(sim: Simulated) -> int:
    return sum(int(a.nbytes) for a in (getattr(sim, f, None) for f in sim.__dataclass_fields__)
               if isinstance(a, np.ndarray))


def _point(case: Case, original_index: int, n: int) -> _Point:
    """Simulate the point's blocks and price the original on them (with its policy)."""
    pilot = case.pilot() if case.early else None
    leg = case.legs[original_index]
    policy = case.fit(leg, pilot) if (pilot is not None and leg.product.early_exercise) else None
    policies: list[Any] = [None] * len(case.legs)
    policies[original_index] = policy
    case.sampler.prepare(0, case.blocks_for(n), n)
    blocks, values, nbytes = [], [], 0
    for b in range(case.blocks_for(n)):
        size = min(BLOCK, n - b * BLOCK)
        sim, uniforms = case.simulated(b, size)
        blocks.append((sim, uniforms))
        values.append(case.present(policies, sim, uniforms, legs=(original_index,))[:, 0])
        nbytes += _arrays_bytes(sim) + values[-1].nbytes
    if pilot is not None:
        nbytes += _arrays_bytes(pilot[0])
    return _Point(blocks, values, policy, pilot, nbytes)


def joint_with_original(mutant: Product, original: Product, model: Model, *, paths: int, seed: int, key: int,
                        rule: PathRule, regression_paths: int) -> Joint:
    """The joint statistics of ``[mutant, original]`` on common paths with the path rule
    ``rule``: what :func:`limitcase.engine.evaluate` gives with plain sampling, the point's
    paths and the original's present values reused from an earlier mutant of the same
    point in this process. Raises what pricing either product raises."""
    case = Case([mutant, original], model, seed=seed, key=key, rules=(rule,), method="plain",
                regression_paths=regression_paths, warn=False)
    n = case.round_paths(int(paths))
    state = _state(model)
    ck = None if state is None else (
        type(original), repr(sorted(original.params().items())), state, n, repr(seed), int(key),
        int(regression_paths), case.grid.tobytes())
    pt = _KEPT.get(ck) if ck is not None else None
    if pt is None:
        pt = _point(case, 1, n)
        if ck is not None and pt.nbytes <= MUTATE_SHARED_PATHS_BYTES:
            while _KEPT and _BYTES[0] + pt.nbytes > MUTATE_SHARED_PATHS_BYTES:
                _, old = _KEPT.popitem(last=False)
                _BYTES[0] -= old.nbytes
            _KEPT[ck] = pt
            _BYTES[0] += pt.nbytes
    else:
        _KEPT.move_to_end(ck)
    mine: Leg = case.legs[0]
    policy = case.fit(mine, pt.pilot) if (pt.pilot is not None and mutant.early_exercise) else None
    policies = [policy, pt.policy]
    acc = case.accumulator()
    for b, ((sim, uniforms), xo) in enumerate(zip(pt.blocks, pt.original)):
        xm = case.present(policies, sim, uniforms, legs=(0,))[:, 0]
        acc.add(case.block_result(b, np.column_stack([xm, xo])))
    return acc.joint(Setup(tuple(policies)))
