"""Batched Monte Carlo: random streams, paths, cash flows, estimates.

Reproducibility. Paths come in fixed blocks of :data:`BLOCK` paths; block ``b`` of a case
with key ``k`` draws from its own stream ``SeedSequence(seed, spawn_key=(k, 1, b))``.
A block is summarised on its own (by whichever process computes it) and the summaries are
combined in block order, so the numbers do not depend on the batch size, on how many
processes share the blocks, or on how many more blocks are added later: a longer run
extends a shorter one.

Streams (:mod:`limitcase.streams`): ``ROLE_PATHS`` for pricing paths (block ``b``),
``ROLE_REGRESSION_PILOT`` for the Longstaff-Schwartz pilot and ``ROLE_PILOT_UNIFORMS`` for
its uniforms, ``ROLE_CONTROL_PILOT`` for the control-variate pilot. The Sobol scrambles
have streams of their own (:mod:`limitcase.sampling`).

Where things live. This module is the entry point (:func:`evaluate`, :func:`price`) and
re-exports the engine's parts: :mod:`limitcase.case` (a case's setup, blocks and their
accumulation), :mod:`limitcase.legs` (products on the grid, present values),
:mod:`limitcase.controls` (control variates), :mod:`limitcase.estimates` (``Estimate``,
``Joint``), :mod:`limitcase.streams` (blocks and seeds).

Memory. At most one block of paths lives at a time per process: about
``BLOCK x grid dates x normals per step x 8 bytes`` for the normals (overwritten in place by
the prices), plus what the payoffs allocate on one block, plus, for products with early
exercise, the regression pilot (``regression_paths x grid dates``). The path count itself
never enters the bound.

Common random numbers. All products handed to :func:`evaluate` together see the same paths,
on the union of their dates; each reads its own dates only.

Variance reduction (``method=``, see :mod:`limitcase.sampling` for the sources of normals).
Control variates: products ``C_j`` with exact prices ``mu_j`` (the product's
:meth:`~limitcase.product.Product.control_variates` hook, and the discounted underlying at
each leg's last date, whose price is the model's discounted forward ``S0 exp(-q T)``) are
priced on the same paths, and a statistic ``Y = sum_i w_i V_i`` is estimated by

    Y_cv = mean(Y) - beta . (mean(C) - mu),   beta = Cov(C)^+ Cov(C, Y),

with ``beta`` from pilot paths of their own (``ROLE_CONTROL_PILOT``), independent of the pricing paths: then
``E[Y_cv] = E[Y]`` exactly, and the standard error is that of the per-path values
``Y - beta . C`` (Glasserman 2004, *Monte Carlo Methods in Financial Engineering*,
Section 4.1; the pilot removes the O(1/n) bias of a coefficient fitted on the same paths).
A control whose "exact" price is wrong biases the estimate by ``beta`` times its error: a
check that fails only with controls points at the control (re-run with ``--method plain``).
With Sobol points, controls apply to a statistic only when they explain at least
:data:`SOBOL_CONTROL_R2` of its pilot variance (decided on the pilot, so still unbiased).
"""

from __future__ import annotations

from typing import Any, Callable, Sequence

import numpy as np

from .case import Accumulator, BlockResult, Case, Setup, parse_control
from .checks import PathRule, PathRuleResult
from .controls import CONTROL_PILOT_BLOCKS, SOBOL_CONTROL_R2, gather_controls
from .errors import ParamError
from .estimates import Estimate, Joint
from .legs import grid_of
from .models.base import Model
from .product import Product
from .sampling import MethodSpec
from .settings import DEFAULT_BATCH, DEFAULT_PATHS, DEFAULT_REGRESSION_PATHS, ENGINE_METHOD
from .streams import BLOCK, block_generator, case_key, coerce_seed

__all__ = [
    "BLOCK",
    "DEFAULT_BATCH",
    "DEFAULT_REGRESSION_PATHS",
    "CONTROL_PILOT_BLOCKS",
    "SOBOL_CONTROL_R2",
    "Estimate",
    "Joint",
    "PathRule",
    "PathRuleResult",
    "Case",
    "Setup",
    "BlockResult",
    "Accumulator",
    "evaluate",
    "price",
    "coerce_seed",
    "case_key",
    "block_generator",
    "gather_controls",
    "grid_of",
    "parse_control",
]


def evaluate(
    products: Sequence[Product],
    model: Model,
    *,
    paths: int,
    seed: None | int | np.random.SeedSequence = None,
    key: int = 0,
    rules: Sequence[PathRule] = (),
    batch: int = DEFAULT_BATCH,
    regression_paths: int = DEFAULT_REGRESSION_PATHS,
    sampler: Any = None,
    on_batch: Callable[[int], None] | None = None,
    method: str | MethodSpec = ENGINE_METHOD,
    controls: Sequence[tuple[Product, float]] | None = None,
) -> Joint:
    """Price several products on common paths; return their joint statistics.

    Parameters
    ----------
    products
        The legs of a case. They share every path (common random numbers).
    model
        The model simulated on the union of the products' dates.
    paths
        Number of pricing paths (rounded up to an even number for antithetic pairs and to
        a multiple of the scrambles for Sobol points; ``Joint.paths`` says how many).
    seed, key
        The run's seed and the case's stream key (see :func:`case_key`).
    rules
        Path-by-path identities to verify on every path.
    batch
        Paths between progress reports (rounded up to whole blocks); blocks of
        :data:`BLOCK` paths are simulated one at a time, so neither this nor the
        path count changes the memory bound or the numbers.
    regression_paths
        Pilot paths, from their own streams, on which Longstaff-Schwartz policies are fitted
        for products with early exercise (so the policy never sees the pricing paths).
    sampler
        Source of the normals, overriding the one ``method`` names: a
        :class:`limitcase.sampling.Sampler` or a function ``draw(g, z, block)``.
    on_batch
        Called with the number of paths done after every batch (progress).
    method
        One of :data:`limitcase.sampling.METHODS`: ``"plain"`` (default, ``settings.ENGINE_METHOD``), ``"antithetic"``,
        ``"sobol"``, ``"control"`` and their combinations, or ``"auto"``.
    controls
        With a ``control`` method: ``((product, exact_price), ...)`` to use instead of the
        ones gathered from the products (:func:`gather_controls`).

    Returns
    -------
    Joint
        Means, covariances, path-rule tallies and the method used; ``Joint.estimate(w)``
        gives ``sum(w_i * price_i)`` with its standard error.
    """
    if not isinstance(paths, (int, np.integer)) or isinstance(paths, bool) or paths < 2:
        raise ParamError(f"paths={paths!r} must be an integer >= 2")
    case = Case(products, model, seed=seed, key=key, rules=rules, method=method, controls=controls,
                sampler=sampler, regression_paths=regression_paths)
    setup = case.setup()
    n = case.round_paths(int(paths))
    blocks = case.blocks_for(n)
    per_batch = max(1, Case.blocks_for(batch))
    acc = case.accumulator()
    buf = case.buffer(min(BLOCK, n))
    for b0 in range(0, blocks, per_batch):
        for res in case.blocks(setup, b0, min(blocks, b0 + per_batch), n, buf):
            acc.add(res)
        if on_batch is not None:
            on_batch(acc.paths)
    return acc.joint(setup)


def price(
    product: Product,
    model: Model | None = None,
    *,
    paths: int = DEFAULT_PATHS,
    seed: None | int | np.random.SeedSequence = None,
    **kwargs: Any,
) -> Estimate:
    """Monte Carlo price of one product: ``Estimate(value, stderr, paths)``.

    ``model`` defaults to the product's own scenario. Other keywords go to :func:`evaluate`
    (``method="auto"`` for variance reduction).
    """
    model = product.scenario() if model is None else model
    joint = evaluate([product], model, paths=paths, seed=seed, **kwargs)
    return joint.estimate([1.0])
