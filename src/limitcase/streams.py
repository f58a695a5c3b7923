"""Random streams: the bottom layer every simulation draws from.

Paths come in fixed blocks of :data:`BLOCK` paths. Block ``b`` of the case with key ``k``
draws, for stream role ``r``, from ``SeedSequence(seed, spawn_key=(k, r, b))`` (appended to
the spawn key of the run's seed). A case's key comes from its names (:func:`case_key`), so
its streams do not depend on what else is run; a block's stream does not depend on which
process computes it or on how many blocks follow. Same seed, same numbers.

Roles (the middle word of a block stream's spawn key):

:data:`ROLE_REGRESSION_PILOT` (0)
    the paths on which Longstaff-Schwartz policies are fitted;
:data:`ROLE_PATHS` (1)
    the pricing paths;
:data:`ROLE_PILOT_UNIFORMS` (2)
    the uniforms the regression pilot's products may read;
:data:`ROLE_CONTROL_PILOT` (3)
    the paths on which control-variate coefficients are estimated;
:data:`ROLE_INNER_POINT` (4)
    the draws of a case's interior parameter points (:mod:`limitcase.interior`; the third
    word is the point's number, not a block).

The Sobol scrambles (:mod:`limitcase.sampling`) have spawn keys of four words starting with
:data:`SOBOL_TAG`, never equal to a block stream's three.

This module imports nothing of the project but its errors: every layer above may use it.
"""

from __future__ import annotations

import zlib

import numpy as np

from .errors import ParamError

__all__ = [
    "BLOCK",
    "ROLE_REGRESSION_PILOT",
    "ROLE_PATHS",
    "ROLE_PILOT_UNIFORMS",
    "ROLE_CONTROL_PILOT",
    "ROLE_INNER_POINT",
    "SOBOL_TAG",
    "coerce_seed",
    "case_key",
    "block_generator",
    "blocks_for",
]

BLOCK = 4096
"""Paths per random-stream block. Part of the numbers: changing it changes every result."""

ROLE_REGRESSION_PILOT = 0
"""Stream role of the Longstaff-Schwartz pilot paths."""
ROLE_PATHS = 1
"""Stream role of the pricing paths."""
ROLE_PILOT_UNIFORMS = 2
"""Stream role of the uniforms read on the Longstaff-Schwartz pilot."""
ROLE_CONTROL_PILOT = 3
"""Stream role of the control-variate pilot paths."""
ROLE_INNER_POINT = 4
"""Stream role of the draws of interior parameter points."""

SOBOL_TAG = 0x50B0
"""First word of the Sobol scrambles' spawn keys (four words long: never a block stream's three)."""


def coerce_seed(seed: None | int | np.random.SeedSequence) -> np.random.SeedSequence:
    """The one place a user's seed becomes a :class:`numpy.random.SeedSequence`.

    Raises :class:`~limitcase.errors.ParamError` for anything but ``None``, a non-negative
    integer or a ``SeedSequence``.
    """
    if isinstance(seed, np.random.SeedSequence):
        return seed
    if seed is None:
        return np.random.SeedSequence()
    if isinstance(seed, (int, np.integer)) and not isinstance(seed, bool) and seed >= 0:
        return np.random.SeedSequence(int(seed))
    raise ParamError(f"seed={seed!r} must be None, a non-negative integer or a SeedSequence")


def case_key(*labels: str) -> int:
    """A stable 32-bit key for a case (CRC-32 of its labels joined by ``/``), so its
    streams do not depend on the other cases run."""
    return zlib.crc32("/".join(labels).encode("utf-8"))


def block_generator(seed: np.random.SeedSequence, key: int, role: int, block: int) -> np.random.Generator:
    """The generator of one block of one stream role (``ROLE_*``) of the case ``key``."""
    ss = np.random.SeedSequence(seed.entropy, spawn_key=tuple(seed.spawn_key) + (key, role, block))
    return np.random.Generator(np.random.PCG64(ss))


def blocks_for(paths: int) -> int:
    """How many blocks of :data:`BLOCK` paths hold ``paths`` paths."""
    return -(-int(paths) // BLOCK)
