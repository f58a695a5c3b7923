"""Helpers shared by the audits: outcome records, z-scores, seed and path checks, and the
call into the engine."""

from __future__ import annotations

import inspect
import math
from typing import Any, Sequence

import numpy as np

from ..engine import Joint, evaluate
from ..errors import LimitcaseError, NoReference, ParamError
from ..models.base import Model
from ..product import Product
from ..verdict import Outcome

__all__ = [
    "_name",
    "_outcome",
    "_error",
    "_z",
    "_seed_int",
    "_check_paths",
    "_evaluate",
]


# ----------------------------------------------------------------------------------------
# helpers


def _name(model: Model) -> str:
    return type(model).__name__


def _outcome(model: Model, case: str, **kw: Any) -> Outcome:
    kw.setdefault("note", model.label())
    return Outcome(product=_name(model), case=case, kind="audit", verdict="pass", **kw)


def _error(model: Model, case: str, exc: BaseException, paths: int, seed: int) -> Outcome:
    """The outcome of an audit that could not run: ``skip`` when the model has no trusted
    price to compare with (a missing reference is reported, never an error nor a pass),
    ``error`` otherwise."""
    if isinstance(exc, NoReference):
        return Outcome(product=_name(model), case=case, kind="audit", verdict="skip",
                       message=f"no reference: {exc}", paths=paths, seed=seed, note=model.label())
    kind = "" if isinstance(exc, LimitcaseError) else f"{type(exc).__name__}: "
    return Outcome(product=_name(model), case=case, kind="audit", verdict="error", message=f"{kind}{exc}",
                   paths=paths, seed=seed, note=model.label())


def _z(diff: float, se: float) -> float:
    if se > 0:
        return diff / se
    return 0.0 if diff == 0 else math.copysign(math.inf, diff)


def _seed_int(seed: Any) -> int | None:
    return int(seed) if isinstance(seed, (int, np.integer)) else None


def _check_paths(paths: int, least: int, audit: str) -> None:
    if not isinstance(paths, (int, np.integer)) or paths < least:
        raise ParamError(f"paths={paths!r} is too few for the {audit} audit; it needs at least {least}")


def _evaluate(products: Sequence[Product], model: Model, **kwargs: Any) -> Joint:
    """:func:`limitcase.engine.evaluate` on plain pseudo-random paths, always.

    The audits test the simulation itself: a control variate on the discounted underlying
    would make the martingale test vacuous (it would pin the mean to the forward), and
    antithetic or quasi-random points change what the paths and seeds audits measure.
    """
    if "method" in _EVALUATE_PARAMS:
        kwargs["method"] = "plain"
    return evaluate(products, model, **kwargs)


_EVALUATE_PARAMS = frozenset(inspect.signature(evaluate).parameters)
