"""Helpers for test suites: run a product's declared checks, assert they pass, or assert
that a deliberately broken twin is caught.

Used by the project's own tests and meant for a team's: ``assert_all_pass(MyProduct)`` in
a test function runs every reduction and relation of ``MyProduct`` with Holm's correction
over its checks.

Defaults are those of ``limitcase check`` (:mod:`limitcase.settings`: 100,000 paths per
check, method ``auto``, the same seed and alpha), so a product that passes here passes on
the command line and the reverse. Measured on six catalogue products (European, arithmetic
Asian, up-and-out, Bermudan, cash-or-nothing, floating lookback; one process, CPU time):
40,000 plain paths 1.8 s, 40,000 auto 1.5 s, 100,000 plain 2.5 s, 100,000 auto 2.6 s; the
fixed costs (the Longstaff-Schwartz pilot, the control pilot) weigh as much as the paths.
Pass ``paths=`` for a quicker, less powerful run.
"""

from __future__ import annotations

from typing import Sequence

from .models.base import Model
from .product import Product
from .reduce import LEGS_SUFFIX, checks_for
from .report.terminal import render_table
from .settings import DEFAULT_ALPHA, DEFAULT_METHOD, DEFAULT_PATHS, DEFAULT_SEED
from .suite import RunResult, run_checks

__all__ = ["run_product", "assert_all_pass", "assert_caught", "assert_every_check_has_a_twin"]


def run_product(
    product: Product | type[Product],
    *,
    paths: int = DEFAULT_PATHS,
    seed: int = DEFAULT_SEED,
    alpha: float = DEFAULT_ALPHA,
    select: Sequence[str] = (),
    model: Model | None = None,
    method: str = DEFAULT_METHOD,
) -> RunResult:
    """Run the declared checks of ``product`` (optionally only cases named in ``select``),
    with the same defaults as ``limitcase check`` (:mod:`limitcase.settings`): a product
    that passes here passes there with the same seed."""
    checks = checks_for(product, model)
    if select:
        # a case whose reference is missing keeps its legs' comparison (``case:legs``) with it
        checks = [c for c in checks if c.case in select or c.case.removesuffix(LEGS_SUFFIX) in select]
        missing = set(select) - {c.case.removesuffix(LEGS_SUFFIX) for c in checks}
        if missing:
            raise AssertionError(f"no such case(s) {sorted(missing)} on {product!r}")
    return run_checks(checks, paths=paths, seed=seed, alpha=alpha, method=method)


def assert_all_pass(product: Product | type[Product], **kwargs) -> RunResult:
    """Every declared check of ``product`` passes (raises AssertionError with the table)."""
    result = run_product(product, **kwargs)
    if not result.outcomes:
        raise AssertionError(f"{product!r} declares no reductions or relations")
    if not result.ok:
        bad = [f"{o.case}: {o.verdict} ({o.message})" for o in result.outcomes if o.verdict != "pass"]
        raise AssertionError("\n".join(bad) + "\n" + render_table(result.outcomes))
    return result


def assert_caught(product: Product | type[Product], case: str, **kwargs) -> RunResult:
    """The check named ``case`` of a broken ``product`` fails (or errors): the bug is seen."""
    result = run_product(product, select=(case,), **kwargs)
    o = result.outcomes[0]
    if o.verdict == "pass":
        raise AssertionError(
            f"{case} did not catch the broken {product!r}: value {o.value} +/- {o.stderr}, "
            f"reference {o.reference}, z {o.z}"
        )
    return result


def assert_every_check_has_a_twin(
    shipped: Sequence[type[Product]], twins: Sequence[tuple[type[Product], str]]
) -> None:
    """Every declared check of every ``shipped`` product has a broken twin in ``twins``
    (pairs ``(BrokenSubclass, case)``), and no twin names a case its product does not declare.

    A twin belongs to the first class of its method resolution order that is in ``shipped``.
    """
    declared = {(cls, c.case) for cls in shipped for c in checks_for(cls)}
    covered = set()
    for broken, case in twins:
        owner = next((k for k in broken.__mro__ if k in shipped), None)
        if owner is None:
            raise AssertionError(f"{broken.__name__} derives from none of the shipped products")
        covered.add((owner, case))
    missing = sorted(f"{c.__name__}/{k}" for c, k in declared - covered)
    unknown = sorted(f"{c.__name__}/{k}" for c, k in covered - declared)
    problems = ([f"no broken twin: {', '.join(missing)}"] if missing else []) + (
        [f"twins of undeclared cases: {', '.join(unknown)}"] if unknown else []
    )
    if problems:
        raise AssertionError("; ".join(problems))
