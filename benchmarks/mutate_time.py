"""Wall time of the catalogue's mutation run on two worker processes.

Runs ``limitcase mutate --workers 2 --json FILE`` on the shipped catalogue (or the files
given) in a subprocess, with the command's defaults otherwise, and prints its wall time
(start-up included, as a user waits for it), then the CPU seconds of each phase as the run
records them (``settings.cpu_seconds`` of the JSON: making the mutants, the originals'
checks, the equivalence comparisons, the first pass and the full-budget pass), the counts
and the mutants stopped by the time limit.

A wall time is not a ratio: on a busy machine it grows with the load. The load average is
printed beside it, and the CPU seconds (summed over the processes) move less with it.

Usage: python benchmarks/mutate_time.py [PATH ...] [--workers N] [--select TEXT]
Prints ``mutate_seconds: X`` (target < 90 on 2 cores) first.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, os.path.dirname(__file__))

from _common import load_text  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("paths", nargs="*")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--select", action="append", default=[])
    args = ap.parse_args()
    load_before = load_text()
    with tempfile.TemporaryDirectory() as tmp:
        out = os.path.join(tmp, "mutate.json")
        cmd = [sys.executable, "-c", "from limitcase.cli import main; main()", "mutate", *args.paths,
               "--workers", str(args.workers), "--json", out]
        for s in args.select:
            cmd += ["--select", s]
        t0 = time.perf_counter()
        proc = subprocess.run(cmd, capture_output=True, text=True)
        wall = time.perf_counter() - t0
        doc = json.loads(open(out, encoding="utf-8").read()) if os.path.exists(out) else {}
    print(f"mutate_seconds: {wall:.1f}")
    print(f"exit_code: {proc.returncode}")
    settings = doc.get("settings", {})
    cpu = settings.get("cpu_seconds", {})
    for k, v in cpu.items():
        print(f"cpu_seconds_{k}: {v}")
    print(f"cpu_seconds_total: {sum(cpu.values()):.1f}")
    print(f"runtime_in_library: {doc.get('runtime_seconds', '?')}")
    print(f"counts: {doc.get('counts', '?')}")
    full = settings.get("paths")
    again = sum(1 for m in doc.get("mutants", []) if full is not None and m.get("paths") == full
                and settings.get("quick_paths") != full)
    print(f"first_pass_survivors: {again} of {len(doc.get('mutants', []))} (run again at the full budget)")
    print(f"estimated_seconds_up_front: {settings.get('estimated_seconds', '?')}")
    print(f"workers: {args.workers}")
    print(f"load_before: {load_before}")
    print(f"load_after: {load_text()}")
    if proc.returncode not in (0, 1):
        print(proc.stderr[-2000:])


if __name__ == "__main__":
    main()
