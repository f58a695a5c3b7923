"""The JSON record of a run: ``{"tool", "kind", "settings", "cases": [...], "summary"}``,
and the one JSON number encoding every limitcase file uses.

Each entry of ``cases`` holds at least ``product``, ``case``, ``kind`` ("reduction",
"relation", "audit", "reprice"), ``verdict`` ("pass", "fail", "error", "skip"), ``value``,
``stderr``, ``reference``, ``z`` and ``message``; see docs/json-format.md for the rest.

Numbers (docs/json-format.md, "One rule for numbers"): an infinity is written ``1e308`` or
``-1e308``, a NaN or missing number ``null``; numpy scalars become Python numbers. Files are
written atomically (:func:`write_text_atomic`): a reader or a second run never sees half a
file, and an interrupted run leaves the previous file (or none), never a partial one.
"""

from __future__ import annotations

import json
import os
import tempfile
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..encoding import INFINITY, jsonable

if TYPE_CHECKING:  # pragma: no cover
    from ..verdict import RunResult

__all__ = ["FORMAT_VERSION", "INFINITY", "jsonable", "dumps", "write_text_atomic", "outcomes_document", "write_json"]

FORMAT_VERSION = 1

def dumps(doc: Any) -> str:
    """``doc`` as strict, indented JSON with the numbers encoded by :func:`jsonable`."""
    return json.dumps(jsonable(doc), indent=2, allow_nan=False)


def write_text_atomic(path: str | Path, text: str | bytes) -> None:
    """Write ``text`` to ``path`` through a temporary file in the same folder and
    ``os.replace``: the file appears whole or not at all (two runs writing the same path:
    the last one wins with a complete file)."""
    target = Path(path)
    data = text.encode("utf-8") if isinstance(text, str) else text
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=target.parent or Path("."))
    try:
        with os.fdopen(fd, "wb") as f:
            f.write(data)
        os.chmod(tmp, _mode_for(target))
        os.replace(tmp, target)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def _mode_for(target: Path) -> int:
    """The existing file's permissions, else what the umask gives a new file (mkstemp's
    temporary file is private to its owner)."""
    try:
        return target.stat().st_mode & 0o777
    except OSError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask


def outcomes_document(result: "RunResult", command: str = "check") -> dict[str, Any]:
    """The run as a JSON-ready dictionary."""
    return jsonable({
        "tool": "limitcase",
        "format": FORMAT_VERSION,
        "command": command,
        "settings": {"paths": result.paths, "seed": result.seed, "alpha": result.alpha, **result.extra},
        "cases": [o.to_dict() for o in result.outcomes],
        "summary": result.summary,
    })


def write_json(path: str | Path, result: "RunResult", command: str = "check") -> None:
    """Write the run to ``path`` (UTF-8, indented, atomically)."""
    write_text_atomic(path, dumps(outcomes_document(result, command)) + "\n")
