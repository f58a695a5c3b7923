"""One exception root for the project; every error is also a builtin.

Users may catch ``LimitcaseError`` for anything of ours, or the builtin it also derives
from (``ValueError``, ``LookupError``, ...), whichever suits their code.
"""

from __future__ import annotations

__all__ = [
    "LimitcaseError",
    "ParamError",
    "InputError",
    "NoReference",
    "PayoffError",
    "NegativeAmount",
    "ModelError",
    "DeclarationError",
]


class LimitcaseError(Exception):
    """Root of every error raised by limitcase."""


class ParamError(LimitcaseError, ValueError):
    """A parameter value is outside its declared range or of the wrong type."""


class InputError(LimitcaseError, ValueError):
    """A file, path or argument given to the tool is malformed or missing."""


class NoReference(LimitcaseError, LookupError):
    """No trusted reference price exists for this product under this model."""


class PayoffError(LimitcaseError, RuntimeError):
    """A product's payoff code raised, returned NaN, or returned the wrong shape."""


class NegativeAmount(PayoffError):
    """A product declared non-negative (``nonnegative = True``, an option) paid a negative
    amount: a broken payoff, reported as a failing check (it is evidence, not a crash)."""


class ModelError(LimitcaseError, ValueError):
    """A model cannot simulate what was asked (bad grid, bad correlation, ...)."""


class DeclarationError(ParamError):
    """A product's or model's declarations are inconsistent (a reduction or relation naming a
    parameter that does not exist, a parameter default outside its own range, two checks of
    one name, ...): raised when the class is defined, naming the class and the declaration."""
