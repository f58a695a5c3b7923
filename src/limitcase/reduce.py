"""Declared limits and relations, and the reducer that turns them into checks.

A product class declares, as data:

``reductions``
    :class:`Reduction` entries: which parameters move to which limit and what the product
    becomes there (a base product with a trusted reference price). Where the reduction
    holds on every path (a barrier at infinity is never hit), the limit product and the
    base product are priced on the same paths and compared path by path first.
``relations``
    :class:`Identity` (a combination of products that is zero on every path, e.g.
    in + out - vanilla), :class:`Monotone` (price moves one way in a parameter),
    :class:`Convex` (price convex in a parameter), :class:`Bound` (a no-arbitrage bound).

The reducer (:func:`checks_for`) instantiates the product at its defaults, applies each
declaration and returns :class:`Check` records; the suite prices them and the verdict
module decides.
"""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass, field
from typing import Any, Callable, ClassVar, Mapping, Sequence

from .checks import Check, PathRule
from .errors import DeclarationError, LimitcaseError, NoReference, ParamError
from .models.base import Model
from .product import Product

__all__ = [
    "Reduction",
    "Relation",
    "Identity",
    "Monotone",
    "Convex",
    "Bound",
    "Check",
    "checks_for",
    "declaration_checks",
    "declaration_name",
    "limit_product",
    "reduction_check",
    "reduction_checks",
    "LEGS_SUFFIX",
    "PathRule",
    "require_param",
]

Value = Any  # a number, or a callable of the product giving one


def _resolve(value: Value, product: Product) -> Any:
    return value(product) if callable(value) else value


def _suggest(name: str, known: Sequence[str]) -> str:
    """``; did you mean 'x'?`` for the closest known name (difflib), or the known names."""
    close = difflib.get_close_matches(str(name), list(known), n=1, cutoff=0.6)
    if close:
        return f"; did you mean {close[0]!r}?"
    return f"; its parameters are: {', '.join(known) or 'none'}"


def _require_param(cls: type, what: str, name: Any, verb: str = "names") -> None:
    """Raise :class:`DeclarationError` unless ``name`` is a declared parameter of ``cls``."""
    known = list(cls.param_specs())  # type: ignore[attr-defined]
    if name not in known:
        raise DeclarationError(
            f"{cls.__name__}: {what} {verb} {name!r}, which is not a parameter{_suggest(name, known)}"
        )


require_param = _require_param
"""For relations declared in other modules (:class:`limitcase.ties.Tie`)."""


def _param_value(product: Product, what: str, name: str) -> Any:
    """The value of parameter ``name`` of ``product``, or a :class:`DeclarationError` naming
    the declaration (for declarations that escaped the class-time validation)."""
    values = product.params()
    if name not in values:
        _require_param(type(product), what, name)
    return values[name]


@dataclass(frozen=True)
class Reduction:
    """A degenerate limit of a product.

    Parameters
    ----------
    name
        Case name, e.g. ``"barrier_to_infinity"``.
    changes
        Parameter -> limit value (or a callable of the product returning it).
    becomes
        Callable of the product *at its limit* returning the base product.
    exact
        The limit and the base product pay the same on every path (checked path by path).
    model_changes
        Model parameters changed for this case (a Bermudan call needs no dividends to be
        a European call).
    reference_model
        Callable ``(model, product) -> model`` for the base product's reference when the
        base lives under another model (a basket of identical assets -> one asset).
        Implies ``exact=False``.
    allowance, reason
        A declared bias allowance (a number, or a callable of ``(product, model)``) and
        why it exists (Longstaff-Schwartz regression bias, discrete monitoring, ...).
    note
        The limit behaviour in words, for the dossier.
    """

    name: str
    changes: Mapping[str, Value]
    becomes: Callable[[Product], Product]
    exact: bool = True
    model_changes: Mapping[str, Any] = field(default_factory=dict)
    reference_model: Callable[[Model, Product], Model] | None = None
    allowance: Any = 0.0
    reason: str = ""
    note: str = ""

    declaration_kind: ClassVar[str] = "reductions"

    @property
    def case_name(self) -> str:
        """The name of the check this declaration produces."""
        return self.name

    def describe(self) -> str:
        return f"Reduction {self.name!r}"

    def validate_on(self, cls: type) -> None:
        """Checks run when ``cls`` is defined: a name, known parameters, a callable ``becomes``."""
        if not isinstance(self.name, str) or not self.name:
            raise DeclarationError(f"{cls.__name__}: a Reduction needs a non-empty name; got {self.name!r}")
        if not isinstance(self.changes, Mapping):
            raise DeclarationError(
                f"{cls.__name__}: {self.describe()} changes={self.changes!r}; give a mapping "
                "parameter -> limit value (or a callable of the product)"
            )
        for key in self.changes:
            _require_param(cls, self.describe(), key, "sets")
        if not callable(self.becomes):
            raise DeclarationError(
                f"{cls.__name__}: {self.describe()} becomes={self.becomes!r} is not callable; give a "
                "function of the product at its limit returning the base product"
            )
        if self.reference_model is not None and not callable(self.reference_model):
            raise DeclarationError(
                f"{cls.__name__}: {self.describe()} reference_model={self.reference_model!r} is not callable"
            )


class Relation:
    """Base of the must-hold relations; subclasses produce their checks.

    A subclass may override :meth:`validate_on` (run when a product class declaring it is
    defined) and :attr:`case_name` (the name of its check, when it is known in advance)."""

    declaration_kind: ClassVar[str] = "relations"

    @property
    def case_name(self) -> str:
        """The name of the check this relation produces ("" when it depends on the product)."""
        return getattr(self, "name", "") or ""

    def describe(self) -> str:
        return f"{type(self).__name__} {self.case_name!r}" if self.case_name else type(self).__name__

    def validate_on(self, cls: type) -> None:
        """Checks run when a product class declaring this relation is defined; default none."""

    def checks(self, product: Product, model: Model) -> list[Check]:
        raise NotImplementedError


@dataclass(frozen=True)
class Identity(Relation):
    """``sum(w_i * product_i) == 0``: on every path if ``pathwise``, else in price.

    ``legs`` is a callable of the product returning ``[(weight, product), ...]``.
    """

    name: str
    legs: Callable[[Product], Sequence[tuple[float, Product]]]
    pathwise: bool = True
    note: str = ""

    def validate_on(self, cls: type) -> None:
        if not isinstance(self.name, str) or not self.name:
            raise DeclarationError(f"{cls.__name__}: an Identity needs a non-empty name; got {self.name!r}")
        if not callable(self.legs):
            raise DeclarationError(
                f"{cls.__name__}: {self.describe()} legs={self.legs!r} is not callable; give a function "
                "of the product returning [(weight, product), ...]"
            )

    def checks(self, product: Product, model: Model) -> list[Check]:
        pairs = list(self.legs(product))
        weights = tuple(float(w) for w, _ in pairs)
        legs = tuple(p for _, p in pairs)
        rules = (PathRule(weights, "=="),) if self.pathwise else ()
        return [
            Check(
                product=type(product).__name__,
                case=self.name,
                kind="relation",
                legs=legs,
                model=model,
                weights=weights,
                target=0.0,
                target_source="identity",
                sense="==",
                rules=rules,
                note=self.note or _combo_text(pairs),
            )
        ]


@dataclass(frozen=True)
class Monotone(Relation):
    """Price increases (``direction=+1``) or decreases (``-1``) in ``param``.

    The product is compared at its default and at ``to`` (a value or a callable of the
    product) on common paths, so the difference is precise. With ``pathwise=True`` the
    ordering must also hold on every path (it does for a barrier or a strike).
    """

    param: str
    direction: int
    to: Value
    pathwise: bool = False
    name: str = ""
    note: str = ""

    @property
    def case_name(self) -> str:
        return self.name or f"{'increasing' if self.direction > 0 else 'decreasing'}_in_{self.param}"

    def validate_on(self, cls: type) -> None:
        _require_param(cls, self.describe(), self.param)
        if isinstance(self.direction, bool) or self.direction not in (1, -1):
            raise DeclarationError(
                f"{cls.__name__}: {self.describe()} has direction={self.direction!r}; use +1 (the price "
                f"increases in {self.param!r}) or -1 (it decreases)"
            )

    def checks(self, product: Product, model: Model) -> list[Check]:
        here = _param_value(product, self.describe(), self.param)
        there = _resolve(self.to, product)
        moved = product.replace(**{self.param: there})
        up = there > here
        sense = ">=" if (self.direction > 0) == up else "<="
        name = self.case_name
        rules = (PathRule((1.0, -1.0), sense),) if self.pathwise else ()
        return [
            Check(
                product=type(product).__name__,
                case=name,
                kind="relation",
                legs=(moved, product),
                model=model,
                weights=(1.0, -1.0),
                target=0.0,
                target_source=f"price at {self.param}={_num(there)} {sense} price at {self.param}={_num(here)}",
                sense=sense,
                rules=rules,
                note=self.note,
            )
        ]


@dataclass(frozen=True)
class Convex(Relation):
    """Price convex in ``param``: ``V(x - h) - 2 V(x) + V(x + h) >= 0`` (``h`` = ``step``)."""

    param: str
    step: Value
    pathwise: bool = False
    name: str = ""
    note: str = ""

    @property
    def case_name(self) -> str:
        return self.name or f"convex_in_{self.param}"

    def validate_on(self, cls: type) -> None:
        _require_param(cls, self.describe(), self.param)

    def checks(self, product: Product, model: Model) -> list[Check]:
        x = _param_value(product, self.describe(), self.param)
        h = _resolve(self.step, product)
        legs = (product.replace(**{self.param: x - h}), product, product.replace(**{self.param: x + h}))
        w = (1.0, -2.0, 1.0)
        return [
            Check(
                product=type(product).__name__,
                case=self.case_name,
                kind="relation",
                legs=legs,
                model=model,
                weights=w,
                target=0.0,
                target_source=f"second difference in {self.param} (step {_num(h)}) >= 0",
                sense=">=",
                rules=(PathRule(w, ">="),) if self.pathwise else (),
                note=self.note,
            )
        ]


@dataclass(frozen=True)
class Bound(Relation):
    """A no-arbitrage bound: price ``side`` (``>=`` or ``<=``) ``value(product, model)``.

    ``value`` must come from outside the engine (a discount factor, a forward, a closed
    form). ``pathwise_leg``, if given, is a callable of the product returning a product whose
    cash flow bounds this one's on every path (a call never pays more than the asset).
    """

    name: str
    side: str
    value: Callable[[Product, Model], float]
    pathwise_leg: Callable[[Product], Product] | None = None
    source: str = ""
    note: str = ""

    def validate_on(self, cls: type) -> None:
        if not isinstance(self.name, str) or not self.name:
            raise DeclarationError(f"{cls.__name__}: a Bound needs a non-empty name; got {self.name!r}")
        if self.side not in (">=", "<="):
            close = difflib.get_close_matches(str(self.side), [">=", "<="], n=1, cutoff=0.0)
            raise DeclarationError(
                f"{cls.__name__}: {self.describe()} has side={self.side!r}; use '>=' or '<='"
                + (f"; did you mean {close[0]!r}?" if close else "")
            )
        if not callable(self.value):
            raise DeclarationError(
                f"{cls.__name__}: {self.describe()} value={self.value!r} is not callable; give a function "
                "(product, model) -> bound"
            )

    def _without_reference(self, product: Product, model: Model, exc: NoReference) -> list[Check]:
        return _bound_without_reference(self, product, model, exc)

    def checks(self, product: Product, model: Model) -> list[Check]:
        if self.side not in (">=", "<="):
            raise ParamError(f"Bound {self.name!r}: side={self.side!r} must be '>=' or '<='")
        try:
            target = float(self.value(product, model))
        except NoReference as exc:
            return self._without_reference(product, model, exc)
        if math.isnan(target):
            raise DeclarationError(
                f"{type(product).__name__}: {self.describe()} evaluates to NaN at {product.label()} under "
                f"{type(model).__name__}; a bound must be a number (check the formula's domain)"
            )
        legs: tuple[Product, ...] = (product,)
        weights: tuple[float, ...] = (1.0,)
        rules: tuple[PathRule, ...] = ()
        if self.pathwise_leg is not None:
            legs = (product, self.pathwise_leg(product))
            weights = (1.0, 0.0)
            rules = (PathRule((1.0, -1.0), self.side),)
        return [
            Check(
                product=type(product).__name__,
                case=self.name,
                kind="relation",
                legs=legs,
                model=model,
                weights=weights,
                target=target,
                target_source=self.source or f"bound {self.side} {target:.6g}",
                sense=self.side,
                rules=rules,
                note=self.note,
            )
        ]


def _bound_without_reference(bound: "Bound", product: Product, model: Model, exc: NoReference) -> list[Check]:
    name = type(product).__name__
    skip = Check(product=name, case=bound.name, kind="relation", legs=(product,), model=model, sense=bound.side,
                 note=bound.note, skip=f"no reference for the bound under {type(model).__name__}: {exc}")
    if bound.pathwise_leg is None:
        return [skip]
    leg = bound.pathwise_leg(product)
    legs = Check(
        product=name, case=bound.name + LEGS_SUFFIX, kind="relation", legs=(product, leg), model=model,
        weights=(1.0, -1.0), target=0.0, sense=bound.side,
        target_source=f"price {bound.side} {leg.label()} on the same paths (the bound's value is missing)",
        rules=(PathRule((1.0, -1.0), bound.side),), note=bound.note,
    )
    return [legs, skip]


def limit_product(product: Product, reduction: Reduction) -> Product:
    """The product with the reduction's parameters moved to their limit."""
    changes = {k: _resolve(v, product) for k, v in reduction.changes.items()}
    return product.replace(**changes)


def reduction_check(product: Product, model: Model, red: Reduction) -> Check:
    """The check of one declared reduction against its base product's reference (an error
    record if it cannot be built; a skip record, with its reason, when the base product has
    no reference under the model). :func:`reduction_checks` adds, for a skip, the comparison
    of the legs on common paths that still runs."""
    return reduction_checks(product, model, red)[-1]


def reduction_checks(product: Product, model: Model, red: Reduction) -> list[Check]:
    """The checks of one declared reduction.

    Normally one: the limit product against the base product's reference (path by path
    first, when the reduction is exact). When the base product has no reference under the
    model (:class:`~limitcase.errors.NoReference`), two: ``<name>:legs``, the limit product
    against the base product priced on the same paths (path by path for an exact reduction,
    and their prices on common paths, difference 0 within the declared allowance), then
    ``<name>`` itself as a skip naming the missing reference. A base product that lives under
    another model (``reference_model``) cannot share paths, and a product's own closed form
    (the base is the product itself) has nothing to compare: only the skip is left."""
    name = type(product).__name__
    try:
        if red.model_changes:
            model = model.replace(**dict(red.model_changes))
        at_limit = limit_product(product, red)
        base = red.becomes(at_limit)
        if not isinstance(base, Product):
            raise DeclarationError(
                f"{name}: Reduction {red.name!r}: becomes returned {base!r} (a {type(base).__name__}), "
                "not a Product; it must return the base product, whose reference gives the price"
            )
        ref_model = red.reference_model(model, at_limit) if red.reference_model else model
        try:
            target = float(base.reference(ref_model))
        except NoReference as exc:
            return _without_reference(name, red, model, at_limit, base, exc)
        allowance = float(red.allowance(at_limit, model)) if callable(red.allowance) else float(red.allowance)
    except NoReference as exc:
        return [Check(product=name, case=red.name, kind="reduction", error=f"no reference for the base case: {exc}")]
    except DeclarationError as exc:
        return [Check(product=name, case=red.name, kind="reduction", error=str(exc))]
    except LimitcaseError as exc:
        return [Check(product=name, case=red.name, kind="reduction", error=f"cannot build the limit case: {exc}")]
    except Exception as exc:  # declaration code of the product failed
        return [Check(
            product=name, case=red.name, kind="reduction",
            error=f"the reduction's declaration raised {type(exc).__name__}: {exc}",
        )]
    exact = red.exact and red.reference_model is None
    legs: tuple[Product, ...] = (at_limit, base) if exact else (at_limit,)
    weights = (1.0, 0.0) if exact else (1.0,)
    rules = (PathRule((1.0, -1.0), "=="),) if exact else ()
    return [Check(
        product=name,
        case=red.name,
        kind="reduction",
        legs=legs,
        model=model,
        weights=weights,
        target=target,
        target_source=f"{base.label()} by {base.reference_source()}",
        sense="==",
        rules=rules,
        allowance=allowance,
        allowance_reason=red.reason,
        note=_reduction_note(red, at_limit, base),
    )]


LEGS_SUFFIX = ":legs"
"""Appended to a case's name for the part that still runs when its reference is missing."""


def _reduction_note(red: Reduction, at_limit: Product, base: Product) -> str:
    changes = ", ".join(f"{k}={_num(v)}" for k, v in at_limit.params().items() if k in red.changes)
    return red.note or f"{changes}: becomes {base.label()}"


def _same_product(a: Product, b: Product) -> bool:
    try:
        return type(a) is type(b) and a.params() == b.params()
    except Exception:  # parameters that cannot be compared: treat as different
        return False


def _without_reference(name: str, red: Reduction, model: Model, at_limit: Product, base: Product,
                       exc: NoReference) -> list[Check]:
    reason = f"no reference for the base case {base.label()} under {type(model).__name__}: {exc}"
    skip = Check(product=name, case=red.name, kind="reduction", legs=(at_limit, base), model=model,
                 target_source=f"{base.label()} (no reference)", note=_reduction_note(red, at_limit, base),
                 skip=reason)
    if red.reference_model is not None or _same_product(at_limit, base):
        return [skip]  # another model's base cannot share paths; a product against itself proves nothing
    try:
        allowance = float(red.allowance(at_limit, model)) if callable(red.allowance) else float(red.allowance)
    except Exception:  # an allowance computed from the missing reference: the legs cannot be compared
        return [skip]
    legs = Check(
        product=name,
        case=red.name + LEGS_SUFFIX,
        kind="reduction",
        legs=(at_limit, base),
        model=model,
        weights=(1.0, -1.0),
        target=0.0,
        target_source=f"{base.label()} priced on the same paths (its reference is missing)",
        sense="==",
        rules=(PathRule((1.0, -1.0), "=="),) if red.exact else (),
        allowance=allowance,
        allowance_reason=red.reason,
        note=_reduction_note(red, at_limit, base),
    )
    return [legs, skip]


def checks_for(product: Product | type[Product], model: Model | None = None) -> list[Check]:
    """All declared reductions and relations of a product, as checks.

    ``product`` may be a class (instantiated at its defaults) or an instance; ``model``
    defaults to the product's scenario.
    """
    if isinstance(product, type):
        product = product()
    model = product.scenario() if model is None else model
    out: list[Check] = []
    for decl in (*type(product).reductions, *type(product).relations):
        out.extend(declaration_checks(product, model, decl))
    return out


def declaration_checks(product: Product, model: Model, decl: "Reduction | Relation") -> list[Check]:
    """The checks of one declaration (a :class:`Reduction` or a relation) of ``product``
    under ``model``: a declaration whose code raises is an error record for its case only."""
    if isinstance(decl, Reduction):
        return reduction_checks(product, model, decl)
    name = type(product).__name__
    try:
        return list(decl.checks(product, model))
    except NoReference as exc:
        return [Check(product=name, case=_relation_name(decl), kind="relation", model=model,
                      skip=f"no reference for the relation under {type(model).__name__}: {exc}")]
    except DeclarationError as exc:
        return [Check(product=name, case=_relation_name(decl), kind="relation", error=str(exc))]
    except Exception as exc:
        return [Check(product=name, case=_relation_name(decl), kind="relation",
                      error=f"the relation's declaration raised {type(exc).__name__}: {exc}")]


def declaration_name(decl: Any) -> str:
    """The case name a declaration's check carries at the defaults."""
    return decl.name if isinstance(decl, Reduction) else _relation_name(decl)


def _relation_name(rel: Any) -> str:
    try:
        return str(getattr(rel, "case_name", "") or getattr(rel, "name", "") or type(rel).__name__)
    except Exception:  # a case_name computed from a broken declaration
        return type(rel).__name__


def _num(v: Any) -> str:
    if isinstance(v, float):
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return f"{v:g}"
    return str(v)


def _combo_text(pairs: Sequence[tuple[float, Product]]) -> str:
    parts = []
    for w, p in pairs:
        sign = "+" if w >= 0 else "-"
        mag = "" if abs(w) == 1 else f"{abs(w):g} "
        parts.append(f"{sign} {mag}{p.label()}")
    text = " ".join(parts).lstrip("+ ")
    return f"{text} = 0 on every path"
