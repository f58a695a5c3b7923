"""The catalogue's dossier against its check, on the same machine in the same run.

Runs the default ``limitcase check`` of the shipped catalogue and the default
``limitcase report`` of it (written to a temporary folder), each in a subprocess with all
cores, alternating which goes first, ``--repeat`` times; the headline is the median of
t(report) / t(check) over adjacent pairs. Wall times include start-up (imports, loading
the catalogue, building the checks), as a user waits for them.

The machine should be otherwise quiet: the load average is printed beside the figures.

Usage: python benchmarks/dossier.py [--repeat R] [--workers N] [--select TEXT]
Prints ``dossier_over_check: X`` (target <= 2) first.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, os.path.dirname(__file__))

from _common import load_text, median  # noqa: E402


def _run(args: list[str]) -> tuple[float, int, str]:
    cmd = [sys.executable, "-c", "from limitcase.cli import main; main()", *args]
    t0 = time.perf_counter()
    proc = subprocess.run(cmd, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    return wall, proc.returncode, proc.stdout + proc.stderr


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=1)
    ap.add_argument("--workers", type=int, default=None)
    ap.add_argument("--select", action="append", default=[])
    args = ap.parse_args()
    extra = [] if args.workers is None else ["--workers", str(args.workers)]
    for s in args.select:
        extra += ["--select", s]
    load_before = load_text()
    ratios, checks, reports, codes = [], [], [], []
    with tempfile.TemporaryDirectory() as tmp:
        for i in range(args.repeat):
            def check() -> tuple[float, int, str]:
                return _run(["check", "--json", os.devnull, *extra])

            def report() -> tuple[float, int, str]:
                return _run(["report", "-o", os.path.join(tmp, f"dossier{i}"), *extra])

            if i % 2:
                (tr, cr, outr), (tc, cc, outc) = report(), check()
            else:
                (tc, cc, outc), (tr, cr, outr) = check(), report()
            checks.append(tc)
            reports.append(tr)
            ratios.append(tr / tc)
            codes.append((cc, cr))
            summary = [line for line in outr.splitlines() if " products, " in line]
    print(f"dossier_over_check: {median(ratios):.3f}")
    print(f"check_seconds: {median(checks):.2f}")
    print(f"report_seconds: {median(reports):.2f}")
    print(f"all_ratios: {', '.join(f'{r:.3f}' for r in ratios)}")
    print(f"exit_codes_check_report: {codes}")
    print(f"report_summary: {summary[-1] if summary else '?'}")
    print(f"load_before: {load_before}")
    print(f"load_after: {load_text()}")


if __name__ == "__main__":
    main()
