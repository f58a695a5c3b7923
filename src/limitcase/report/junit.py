"""JUnit XML of a run, one testcase per case, for CI dashboards.

A failing case carries its message and the command line that reproduces it (seed and
paths included); an error case is written as a JUnit ``<error>``.
"""

from __future__ import annotations

import io
import xml.etree.ElementTree as ET
from ..settings import reproduce_check
from pathlib import Path
from typing import TYPE_CHECKING

from .jsonfile import write_text_atomic

if TYPE_CHECKING:  # pragma: no cover
    from ..verdict import RunResult

__all__ = ["junit_tree", "write_junit"]


def junit_tree(result: "RunResult", command: str = "check", reproduce: str = "limitcase check") -> ET.ElementTree:
    """The run as an ElementTree of ``<testsuites><testsuite>...``."""
    s = result.summary
    suites = ET.Element("testsuites")
    suite = ET.SubElement(
        suites, "testsuite", name=f"limitcase {command}", tests=str(s["total"]),
        failures=str(s["fail"]), errors=str(s["error"]), skipped=str(s.get("skip", 0)),
    )
    props = ET.SubElement(suite, "properties")
    for k, v in (("paths", result.paths), ("seed", result.seed), ("alpha", result.alpha)):
        ET.SubElement(props, "property", name=k, value=str(v))
    for o in result.outcomes:
        case = ET.SubElement(suite, "testcase", classname=f"{o.kind}.{o.product}", name=o.case)
        detail = (
            f"value {o.value} +/- {o.stderr}, reference {o.reference}, z {o.z}, "
            f"p {o.p_value}, adjusted p {o.p_adjusted}"
        )
        if o.verdict == "fail":
            el = ET.SubElement(case, "failure", message=o.message or "check failed")
            el.text = f"{detail}\nreproduce: " + reproduce_check(reproduce, seed=result.seed, paths=result.paths,
                                                                 select=f"{o.product}/{o.case}")
        elif o.verdict == "error":
            el = ET.SubElement(case, "error", message=o.message or "error")
            el.text = o.message
        elif o.verdict == "skip":  # no reference under the model: reported, not tested
            ET.SubElement(case, "skipped", message=o.message or "skipped")
        else:
            out = ET.SubElement(case, "system-out")
            out.text = detail
    ET.indent(suites)
    return ET.ElementTree(suites)


def write_junit(path: str | Path, result: "RunResult", command: str = "check", reproduce: str = "limitcase check") -> None:
    """Write the JUnit XML of a run to ``path`` (atomically)."""
    buf = io.BytesIO()
    junit_tree(result, command, reproduce).write(buf, encoding="utf-8", xml_declaration=True)
    write_text_atomic(path, buf.getvalue())
