"""Running the audits of one model or of several, with Holm's correction over the run."""

from __future__ import annotations

import time
from typing import Any, Callable, Iterable, Mapping, Sequence

from ..engine import coerce_seed
from ..errors import InputError
from ..models.base import Model
from ..settings import DEFAULT_ALPHA, DEFAULT_PATHS, DEFAULT_SEED
from ..verdict import Outcome, RunResult, finalise
from .constants import AUDITS, default_models
from .common import _error, _name, _seed_int
from .martingale import audit_martingale, audit_paths, audit_seeds
from .steps import audit_degenerations, audit_steps

__all__ = [
    "audit_model",
    "run_audits",
]


# ----------------------------------------------------------------------------------------
# runner


_RUNNERS: dict[str, Callable[..., list[Outcome]]] = {
    "martingale": audit_martingale,
    "paths": audit_paths,
    "seeds": audit_seeds,
    "steps": audit_steps,
    "degenerations": audit_degenerations,
}


def audit_model(
    model: Model,
    audits: Sequence[str] = AUDITS,
    *,
    paths: int = DEFAULT_PATHS,
    seed: int = DEFAULT_SEED,
    alpha: float = DEFAULT_ALPHA,
    drift_correction: bool = False,
    timings: dict[str, float] | None = None,
) -> list[Outcome]:
    """Run the named audits on one model; outcomes before the run-wide correction.

    An audit that raises becomes an ``error`` outcome for that audit; the others still run.
    ``timings``, if given, receives the seconds each audit took.
    """
    unknown = [a for a in audits if a not in _RUNNERS]
    if unknown:
        raise InputError(f"unknown audit {unknown[0]!r}; the audits are: {', '.join(AUDITS)}")
    out: list[Outcome] = []
    for name in audits:
        kwargs: dict[str, Any] = dict(paths=paths, seed=seed, alpha=alpha)
        if name == "martingale":
            kwargs["drift_correction"] = drift_correction
        start = time.perf_counter()
        try:
            out.extend(_RUNNERS[name](model, **kwargs))
        except Exception as exc:  # the model (or its declarations) failed: report it, go on
            out.append(_error(model, name, exc, paths, _seed_int(seed) or 0))
        if timings is not None:
            timings[name] = time.perf_counter() - start
    return out


def run_audits(
    models: Mapping[str, Model] | Iterable[Model] | None = None,
    audits: Sequence[str] = AUDITS,
    *,
    paths: int = DEFAULT_PATHS,
    seed: int = DEFAULT_SEED,
    alpha: float = DEFAULT_ALPHA,
    drift_correction: bool = False,
    select: Sequence[str] = (),
    progress: Callable[[int, int], None] | None = None,
) -> RunResult:
    """Audit every model (default: :func:`default_models`) and apply Holm's correction
    over all the audits' outcomes at level ``alpha``.

    ``select``: keep only the outcomes whose ``model/case`` contains one of these texts
    (and run only the audits that can produce them), before the correction.
    ``RunResult.extra`` holds the models audited and the seconds each audit took
    (``timings``: ``{model name: {audit: seconds}}``).
    """
    coerce_seed(seed)
    if models is None:
        models = default_models()
    items = list(models.items()) if isinstance(models, Mapping) else [(_name(m), m) for m in models]
    outcomes: list[Outcome] = []
    timings: dict[str, dict[str, float]] = {}
    for i, (name, model) in enumerate(items):
        timings[name] = {}
        wanted = [a for a in audits if not select
                  or any(p in f"{_name(model)}/{a}" or f"{_name(model)}/{a}" in p for p in select)]
        found = audit_model(model, wanted, paths=paths, seed=seed, alpha=alpha,
                            drift_correction=drift_correction, timings=timings[name])
        if select:
            found = [o for o in found if any(p in f"{o.product}/{o.case}" for p in select)]
        outcomes.extend(found)
        if progress is not None:
            progress(i + 1, len(items))
    extra = {
        "models": {name: m.label() for name, m in items},
        "audits": list(audits),
        "timings": {k: {a: round(s, 3) for a, s in v.items()} for k, v in timings.items()},
    }
    return RunResult(finalise(outcomes, alpha), paths=paths, seed=seed, alpha=alpha, extra=extra)
