"""Model wrappers used by the audits: the empirical martingale correction and the
step-refinement levels of a discretised scheme."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from ..errors import ModelError
from ..models.base import Model, Simulated

__all__ = [
    "DriftCorrected",
    "_Level",
    "_Levels",
]


# ----------------------------------------------------------------------------------------
# model wrappers used by the audits


class DriftCorrected(Model):
    """A model whose simulated prices are rescaled, block by block and date by date, so
    that their discounted sample mean is the forward exactly: the empirical martingale
    correction of Duan and Simonato (1998), "Empirical martingale simulation for asset
    prices", Management Science 44(9), in its simplest (one-factor-per-date) form.

    It repairs a scheme's drift for pricing; it is never evidence that the scheme is right.
    The martingale audit therefore always tests the uncorrected model and reports the
    corrected one separately.
    """

    def __init__(self, model: Model) -> None:
        super().__init__()
        object.__setattr__(self, "base", model)
        object.__setattr__(self, "n_assets", model.n_assets)

    @property
    def short_rate(self) -> float:
        return self.base.short_rate

    def normals_per_step(self) -> int:
        return self.base.normals_per_step()

    def initial(self) -> np.ndarray:
        return self.base.initial()

    def dividend_yields(self) -> np.ndarray:
        return self.base.dividend_yields()

    def _simulate(self, times: np.ndarray, z: np.ndarray, rng: np.random.Generator) -> Simulated:
        sim = self.base.simulate(times, z, rng)
        s = sim.s
        target = self.base.forward(times)  # (dates, assets)
        s *= (target / s.mean(axis=0))[None, :, :]
        return Simulated(s=s, step_var=sim.step_var)

    def label(self) -> str:
        return f"DriftCorrected({self.base.label()})"

    def __repr__(self) -> str:
        return self.label()

    def __eq__(self, other: object) -> bool:
        return isinstance(other, DriftCorrected) and other.base == self.base

    def __hash__(self) -> int:
        return hash(("DriftCorrected", self.base))


@dataclass(frozen=True)
class _Level:
    model: Model
    factor: int  # steps of this level per interval of the base grid
    refine: int  # date-grid refinement (1 when the level steps through substeps)


class _Levels(Model):
    """Several step sizes of one model side by side, stacked along the asset axis, so the
    engine prices them in one pass and returns their joint covariance.

    With ``common=True`` every level reads the same normals: the finest level's, summed
    over each coarse step and scaled by ``1/sqrt(group)`` (the Brownian increment of the
    coarse step). With ``common=False`` each level reads its own slice of normals and the
    levels are independent. A level steps either through the model's ``substeps`` (normals
    laid out substep by substep, ``factors`` per substep) or through a refined date grid.
    """

    def __init__(self, base: Model, levels: Sequence[_Level], factors: int, common: bool) -> None:
        super().__init__()
        object.__setattr__(self, "base", base)
        object.__setattr__(self, "levels", tuple(levels))
        object.__setattr__(self, "factors", int(factors))
        object.__setattr__(self, "common", bool(common))
        object.__setattr__(self, "n_assets", base.n_assets * len(levels))
        object.__setattr__(self, "finest", max(lv.factor for lv in levels))
        if common and any(self.finest % lv.factor for lv in levels):
            raise ModelError("common random numbers across levels need step counts that divide the finest")

    @property
    def short_rate(self) -> float:
        return self.base.short_rate

    def normals_per_step(self) -> int:
        if self.common:
            return self.finest * self.factors
        return sum(lv.factor for lv in self.levels) * self.factors

    def initial(self) -> np.ndarray:
        return np.tile(self.base.initial(), len(self.levels))

    def dividend_yields(self) -> np.ndarray:
        return np.tile(self.base.dividend_yields(), len(self.levels))

    def _simulate(self, times: np.ndarray, z: np.ndarray, rng: np.random.Generator) -> Simulated:
        n, steps = z.shape[0], times.size
        fct = self.factors
        out_s, out_v = [], []
        offset = 0
        for lv in self.levels:
            if self.common:
                group = self.finest // lv.factor
                fine = z.reshape(n, steps, lv.factor, group, fct)
                zl = fine.sum(axis=3) / math.sqrt(group)
            else:
                width = lv.factor * fct
                zl = z[:, :, offset:offset + width].reshape(n, steps, lv.factor, fct)
                offset += width
            if lv.refine == 1:
                zl = np.ascontiguousarray(zl.reshape(n, steps, lv.factor * fct))
                sim = lv.model.simulate(times, zl, rng)
                s, v = sim.s, np.broadcast_to(sim.step_var, sim.s.shape)
            else:
                r = lv.refine
                zl = np.ascontiguousarray(zl.reshape(n, steps * r, (lv.factor // r) * fct))
                prev = np.concatenate(([0.0], times[:-1]))
                fine_t = (prev[:, None] + (times - prev)[:, None] * np.arange(1, r + 1)[None, :] / r).reshape(-1)
                sim = lv.model.simulate(fine_t, zl, rng)
                s = sim.s[:, r - 1::r, :]
                v = np.broadcast_to(sim.step_var, sim.s.shape).reshape(n, steps, r, -1).sum(axis=2)
            out_s.append(s)
            out_v.append(v)
        return Simulated(s=np.concatenate(out_s, axis=2), step_var=np.concatenate(out_v, axis=2))

    def label(self) -> str:
        return f"levels of {self.base.label()}"
