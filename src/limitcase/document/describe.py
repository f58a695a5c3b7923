"""A product class as declared, priced nowhere: its parameters and ranges, its scenario,
its reductions (where each limit goes and what the product becomes there) and the cases of
its relations. ``limitcase list`` prints it and each dossier page opens with it."""

from __future__ import annotations

import inspect
import math
from pathlib import Path
from typing import Any

from ..ends import end_table
from ..product import Product
from ..reduce import limit_product
from .records import EndRow, ParamInfo, ProductDescription, ReductionInfo, RelationInfo

__all__ = ["describe_product", "source_of"]


def source_of(cls: type) -> str:
    """The file a class is defined in (its module's name when there is no file)."""
    try:
        return str(Path(inspect.getfile(cls)).resolve())
    except (TypeError, OSError):
        return cls.__module__


def describe_product(cls: type[Product]) -> ProductDescription:
    """Describe ``cls`` from its declarations: nothing is priced. A product that cannot be
    built at its defaults keeps its parameters and carries the ``error``; a reduction or a
    relation that cannot be built carries its own ``error`` and the others are described."""
    doc = inspect.getdoc(cls) or ""
    desc = ProductDescription(
        name=cls.__name__, qualname=f"{cls.__module__}.{cls.__qualname__}", source=source_of(cls), doc=doc,
        summary=doc.strip().split("\n\n")[0].replace("\n", " ") if doc else "",
        multi_asset=bool(getattr(cls, "multi_asset", False)),
    )
    for name, spec in cls.param_specs().items():
        desc.params.append(ParamInfo(
            name=name, default=spec.default, low=spec.low, high=spec.high, low_open=spec.low_open,
            high_open=spec.high_open, integer=spec.integer,
            boolean=bool(spec.integer and spec.low == 0 and spec.high == 1),
            range=spec.range_text(), doc=spec.doc))
    try:
        product = cls()
        model = product.scenario()
        desc.scenario = model.label()
        desc.early_exercise = product.early_exercise
    except Exception as exc:  # bad defaults or a scenario that raises: reported, not raised
        desc.error = f"cannot be built at its defaults: {type(exc).__name__}: {exc}"
        return desc
    for red in cls.reductions:
        changes: dict[str, Any] = {}
        becomes, error = None, None
        try:
            at_limit = limit_product(product, red)
            changes = {k: at_limit.params()[k] for k in red.changes if k in at_limit.params()}
            becomes = red.becomes(at_limit).label()
        except Exception as exc:
            error = f"{type(exc).__name__}: {exc}"
        desc.reductions.append(ReductionInfo(
            name=red.name, exact=bool(red.exact and red.reference_model is None), note=red.note, reason=red.reason,
            changes=changes, becomes=becomes, model_changes=dict(red.model_changes), error=error))
    for rel in cls.relations:
        kind = type(rel).__name__
        try:
            for chk in rel.checks(product, model):
                desc.relations.append(RelationInfo(chk.case, kind, chk.sense, bool(chk.rules),
                                                   chk.note or chk.target_source, chk.error))
        except Exception as exc:
            desc.relations.append(RelationInfo(getattr(rel, "name", "") or kind, kind, None, None, "",
                                               f"{type(exc).__name__}: {exc}"))
    try:
        desc.ends = [EndRow(r.param, r.side, r.end, r.value, r.status, r.text, r.detail, r.suggestion)
                     for r in end_table(product)]
    except Exception as exc:  # an end that cannot be enumerated: reported with the product
        desc.ends = [EndRow("", "", math.nan, math.nan, "error", f"ends cannot be enumerated: {type(exc).__name__}: {exc}")]
    return desc
