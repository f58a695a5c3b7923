"""Mutation reports in JSON: the project's one number encoding
(:func:`limitcase.encoding.jsonable`), under the name the mutate package has always used.

Part of :mod:`limitcase.mutate`.
"""

from __future__ import annotations

from ..encoding import jsonable as json_safe

__all__ = ["json_safe"]
