"""Which checks a ``check`` run makes: the products' declared checks under their own
scenario or under one model the user chose, plus a record for each file that did not import.

Kept apart from the command so that every command choosing a model (``check``, and later
``report``, ``mutate`` and the pytest plugin) builds its checks the same way.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Sequence

from .loader import LoadFailure, qualified_names
from .models.base import Model
from .product import Product
from .ends import end_checks
from .reduce import Check, checks_for
from .second_model import second_model_checks
from .settings import DEFAULT_SEED, END_CHECKS, SECOND_MODEL

__all__ = ["Skipped", "plan_checks", "model_fits"]


@dataclass(frozen=True)
class Skipped:
    """A product not checked under the chosen model, and why (not an error: it cannot be)."""

    product: str
    reason: str


def model_fits(product: Product, model: Model) -> str | None:
    """Why ``product`` cannot run under ``model`` (its asset count differs), or None."""
    wanted = int(product.n_assets) if product.multi_asset else 1
    if wanted != model.n_assets:
        what = f"reads {wanted} asset{'s' if wanted != 1 else ''}"
        return f"{what}; the model {type(model).__name__} simulates {model.n_assets}"
    return None


def plan_checks(classes: Sequence[type[Product]], model: Model | None = None,
                failures: Sequence[LoadFailure] = (), *, inner_points: int = 0,
                seed: int = DEFAULT_SEED, ends: bool = END_CHECKS,
                second_model: bool = SECOND_MODEL) -> tuple[list[Check], list[Skipped]]:
    """The checks of ``classes`` (each under its own scenario, or all under ``model``).

    With ``inner_points`` > 0, each declaration also runs at that many interior parameter
    points drawn from ``seed`` (:mod:`limitcase.interior`), listed after the product's checks
    at the defaults.
    With ``ends``, each product's undeclared parameter ends are checked too
    (:func:`limitcase.ends.end_checks`); with ``second_model``, each path-by-path identity
    again under Heston on warped dates (:func:`limitcase.second_model.second_model_checks`).

    A product whose asset count differs from ``model``'s is skipped with the reason; a file
    that did not import becomes an error check of kind ``"load"`` named after the file; two
    classes of one name from different files are told apart as ``file.py::Class``.
    """
    names = qualified_names(classes)
    checks: list[Check] = [Check(product=str(f.path), case="import", kind="load", error=f.message)
                           for f in failures]
    skipped: list[Skipped] = []
    for cls in classes:
        name = names[cls]
        if model is not None:
            try:
                why = model_fits(cls(), model)
            except Exception as exc:  # the product cannot be made at its defaults: its checks say so
                why = None
                checks.append(Check(product=name, case="defaults", kind="reduction",
                                    error=f"{cls.__name__}() at its defaults raised {type(exc).__name__}: {exc}"))
                continue
            if why is not None:
                skipped.append(Skipped(name, why))
                continue
        try:
            found = checks_for(cls, model)
        except Exception as exc:
            found = [Check(product=cls.__name__, case="defaults", kind="reduction",
                           error=f"{cls.__name__}'s checks cannot be built: {type(exc).__name__}: {exc}")]
        if inner_points > 0:
            from .interior import interior_checks

            broken = {c.case for c in found if c.error is not None}
            try:
                found = found + interior_checks(cls, model, seed=seed, points=inner_points, name=name,
                                                skip_cases=sorted(broken))
            except Exception as exc:  # the product's own code: its interior points are an error of their own
                found = found + [Check(product=cls.__name__, case="interior", kind="reduction",
                                       error=f"{cls.__name__}'s interior points cannot be drawn: "
                                             f"{type(exc).__name__}: {exc}")]
        if ends:
            try:
                found = found + end_checks(cls, model)
            except Exception as exc:
                found.append(Check(product=cls.__name__, case="ends", kind="end",
                                   error=f"{cls.__name__}'s ends cannot be enumerated: {type(exc).__name__}: {exc}"))
        if second_model:
            found = found + second_model_checks(found)
        if name != cls.__name__:
            found = [dataclasses.replace(c, product=name) for c in found]
        checks.extend(found)
    return checks, skipped
