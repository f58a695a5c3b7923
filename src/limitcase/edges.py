"""Deterministic edge paths: price paths that sit exactly on the levels a payoff compares
with (flat on a level, touching it on one date, ending on it), and what a product sees on
them. The mutation tool compares a mutant with its original on these paths
(:mod:`limitcase.mutate.equivalence`); the tie checks pin fixings on a product's levels with
them (:mod:`limitcase.ties`).
"""

from __future__ import annotations

import itertools
import math
from typing import Any, Sequence

import numpy as np

from .models.base import Model
from .product import Observed, Product

__all__ = ["edge_paths", "edge_observed", "observed_on", "product_levels"]


def product_levels(product: Product, s0: np.ndarray) -> list[float]:
    """The positive finite levels a payoff may compare with: the spots and every real parameter."""
    levels: list[float] = []
    for v in list(np.ravel(s0)) + [v for v in product.params().values() if isinstance(v, float)]:
        v = float(v)
        if math.isfinite(v) and v > 0 and not any(abs(v - u) <= 1e-12 * v for u in levels):
            levels.append(v)
    return levels


def edge_paths(t: np.ndarray, s0: float, levels: Sequence[float]) -> np.ndarray:
    """Deterministic price paths ``(paths, dates)`` that sit on the levels the payoff
    compares with: flat at the spot, at half and twice the spot, flat at each level,
    ending exactly at each level, touching each level on the first, a middle and the last
    date, touching one level in the middle and ending on another, rising and falling."""
    n = len(t)
    rows = [np.full(n, s0), np.full(n, 0.5 * s0), np.full(n, 2.0 * s0),
            s0 * np.exp(0.5 * t / t[-1]), s0 * np.exp(-0.5 * t / t[-1])]
    touch = sorted({0, n // 2, n - 1})
    for level in levels:
        rows.append(np.full(n, level))
        rows.append(np.linspace(s0, level, n + 1)[1:])
        for j in touch:
            r = np.full(n, s0)
            r[j] = level
            rows.append(r)
    for a, b in itertools.permutations(levels, 2):
        r = np.full(n, s0)
        r[n // 2] = a
        r[-1] = b
        rows.append(r)
        r = np.full(n, a)
        r[-1] = b
        rows.append(r)
    return np.array(rows, dtype=float)


def edge_observed(product: Product, model: Model, seed: int, levels: Sequence[float] | None = None) -> Observed:
    """What ``product`` sees on the edge paths of ``levels`` (default: :func:`product_levels`),
    every asset on its pattern together and each alone with the others at their spots."""
    t = product.validated_dates()
    s0_all = np.asarray(model.initial(), dtype=float)
    levels = product_levels(product, s0_all) if levels is None else list(levels)
    if product.multi_asset:
        k = s0_all.size
        blocks = []
        base = np.broadcast_to(s0_all, (len(t), k))
        per_asset = [edge_paths(t, float(s0_all[i]), levels) for i in range(k)]
        m = per_asset[0].shape[0]
        together = np.stack([per_asset[i] for i in range(k)], axis=2)  # every asset on its pattern
        blocks.append(together)
        for i in range(k):
            b = np.broadcast_to(base, (m, len(t), k)).copy()
            b[:, :, i] = per_asset[i]
            blocks.append(b)
        s = np.concatenate(blocks, axis=0)
    else:
        s = edge_paths(t, float(s0_all[0]), levels)
    return observed_on(product, model, s, seed)


def observed_on(product: Product, model: Model, s: np.ndarray, seed: int) -> Observed:
    """What ``product`` sees on the given price paths ``s`` (``(paths, dates[, assets])`` at its
    own dates): the model's spot, rate, dividends and per-interval variance, and uniforms
    drawn from ``seed``."""
    t = product.validated_dates()
    s0_all = np.asarray(model.initial(), dtype=float)
    if product.multi_asset:
        s0: Any = s0_all
        dividend: Any = np.asarray(model.dividend_yields(), dtype=float)
    else:
        s0 = float(s0_all[0])
        dividend = float(np.asarray(model.dividend_yields())[0])
    s = np.array(s, dtype=float)
    s.flags.writeable = False
    zeros = np.zeros((1, len(t), model.normals_per_step()))
    sim = model.simulate(t, zeros, np.random.default_rng(seed))
    var = np.broadcast_to(sim.step_var, sim.s.shape)[0]  # (dates, assets)
    if not product.multi_asset:
        var = var[:, 0]
    shape = s.shape

    def step_var() -> np.ndarray:
        return np.broadcast_to(var, shape)

    u = np.random.default_rng(seed).random(shape)
    u.flags.writeable = False
    return Observed(t, s, s0, model.short_rate, step_var, dividend, lambda: u)


