"""A mutant's checks from its original's, when building them never runs the changed statement.

Part of :mod:`limitcase.mutate` (the package docstring describes the method).

Why. Every mutant is judged by its product's declared checks (and the same declarations at
the run's interior points), built for the mutant class: the limit products, the base
products and their reference prices. The references are the costly part (a lattice, a
quadrature, a finite-difference solution: up to a third of a second per product), and they
were computed again for each of a product's mutants, about a fifth of a mutation run.

The argument, as for :mod:`limitcase.mutate.dead`. Building the checks runs the product's
declaration code (its reductions' ``becomes``, its relations, its ``reference``) on
instances made from its parameters. Build them once for the original (a twin subclass that changes
nothing, so that instances made from the product can be told from a declaration naming its
own class), recording which lines of the product's module execute. If no line of the mutated statement executed, building them
for the mutant runs the same code on the same numbers: the same cases in the same order, the
same targets, allowances and legs, but with the mutant where the original stood. So the
twin's checks, with every instance of the twin replaced by the mutant class at the same
parameters, are the mutant's checks (``tests/mutate/test_same_checks.py`` compares
them with a fresh build over catalogue products). A tie check decides on its check's legs
(:attr:`limitcase.checks.Check.direct`), so it follows the replacement.
"""

from __future__ import annotations

import dataclasses
from typing import Callable

from ..checks import Check
from ..product import Product
from .dead import mutated_lines, traced
from .mutants import Mutant

__all__ = ["mutant_checks", "forget_originals"]

_ORIGINALS: dict[type, tuple[type[Product], list[Check], frozenset[int]]] = {}
"""Per original class (this process): its twin (:func:`_twin`), the twin's checks, and the
lines of the product's module that ran while they were built."""

MOST_KEPT = 8
"""Original classes remembered at once (the mutants of a product come together)."""


def forget_originals() -> None:
    """Forget the originals' checks (this process)."""
    _ORIGINALS.clear()


def _twin(cls: type[Product]) -> type[Product]:
    """A subclass of ``cls`` changing nothing, made as a mutant class is: the checks built
    for it hold it where a mutant's hold the mutant (instances made from the product, by
    ``replace`` or ``type(p)``), and ``cls`` itself where a declaration names its own class
    (a mutant's checks hold the unmutated class there too)."""
    return type(cls)(cls.__name__, (cls,), {"__module__": cls.__module__, "__qualname__": cls.__qualname__,
                                            "__doc__": cls.__doc__, "mutant_of": cls})


def _on(check: Check, original: type[Product], cls: type[Product]) -> Check:
    """``check`` with the mutant class wherever it holds the original's (its legs, and the
    product of an interior point's origin)."""
    changes: dict = {}
    if any(type(leg) is original for leg in check.legs):
        changes["legs"] = tuple(cls(**leg.params()) if type(leg) is original else leg for leg in check.legs)
    origin = check.origin
    if origin is not None and type(origin.product) is original:
        changes["origin"] = dataclasses.replace(origin, product=cls(**origin.product.params()))
    return dataclasses.replace(check, **changes) if changes else check


def mutant_checks(mutant: Mutant, build: Callable[[type[Product]], list[Check]]) -> list[Check]:
    """The checks of ``mutant.cls``: ``build(mutant.cls)``, or, when building the original's
    checks (``build(mutant.original)``, once per original in this process) never runs the
    mutated statement, the original's checks on the mutant (see the module docstring)."""
    stmt = mutated_lines(mutant.file, mutant.mutation.line)
    if stmt is None:
        return build(mutant.cls)
    hit = _ORIGINALS.get(mutant.original)
    if hit is None:
        twin = _twin(mutant.original)
        checks, ran = traced(mutant.file, lambda: build(twin))
        if len(_ORIGINALS) >= MOST_KEPT:
            _ORIGINALS.clear()
        hit = _ORIGINALS[mutant.original] = (twin, checks, ran)
    twin, checks, ran = hit
    if any(line in ran for line in stmt):
        return build(mutant.cls)
    try:
        return [_on(c, twin, mutant.cls) for c in checks]
    except Exception:  # the mutant cannot be made at a leg's parameters: its own build says how
        return build(mutant.cls)
