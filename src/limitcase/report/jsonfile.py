"""The JSON record of a run: ``{"tool", "kind", "settings", "cases": [...], "summary"}``.

Each entry of ``cases`` holds at least ``product``, ``case``, ``kind`` ("reduction",
"relation", "audit", "reprice"), ``verdict`` ("pass", "fail", "error", "skip"), ``value``,
``stderr``, ``reference``, ``z`` and ``message``; see docs/json-format.md for the rest.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from ..suite import RunResult

__all__ = ["outcomes_document", "write_json"]

FORMAT_VERSION = 1


def outcomes_document(result: RunResult, command: str = "check") -> dict[str, Any]:
    """The run as a JSON-ready dictionary."""
    return {
        "tool": "limitcase",
        "format": FORMAT_VERSION,
        "command": command,
        "settings": {"paths": result.paths, "seed": result.seed, "alpha": result.alpha, **result.extra},
        "cases": [o.to_dict() for o in result.outcomes],
        "summary": result.summary,
    }


def write_json(path: str | Path, result: RunResult, command: str = "check") -> None:
    """Write the run to ``path`` (UTF-8, indented)."""
    Path(path).write_text(json.dumps(outcomes_document(result, command), indent=2, allow_nan=False) + "\n", encoding="utf-8")
