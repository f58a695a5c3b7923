"""Speed-up of the full catalogue check on two worker processes.

Builds every check of the shipped catalogue once, then runs them with the ``check``
command's defaults (method auto, 100,000 paths, seed 20261201) on one worker and on two,
alternating, ``--repeat`` times; the speed-up is the median of t(1 worker) / t(2 workers)
over adjacent pairs. The numbers of both runs are compared too: they must be identical.
The wall time of the default ``limitcase check`` (all cores, check building included) is
measured in a subprocess at the end unless ``--no-cli``.

The machine should be otherwise quiet: the load average is printed beside the figures.

Usage: python benchmarks/scaling.py [--paths N] [--repeat R] [--select TEXT] [--no-cli]
Prints ``speedup_2_workers: X`` (target >= 1.8) first.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(__file__))

from _common import load_text, median, timed  # noqa: E402

from limitcase.cli_support import select_checks  # noqa: E402
from limitcase.loader import load_products  # noqa: E402
from limitcase.reduce import checks_for  # noqa: E402
from limitcase.suite import DEFAULT_PATHS, DEFAULT_SEED, run_checks  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--paths", type=int, default=DEFAULT_PATHS)
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--select", action="append", default=[])
    ap.add_argument("--method", default="auto")
    ap.add_argument("--no-cli", action="store_true")
    args = ap.parse_args()
    load_before = load_text()
    t_build, checks = timed(lambda: select_checks([c for p in load_products() for c in checks_for(p)], args.select))

    def run(workers: int):
        return timed(lambda: run_checks(checks, paths=args.paths, seed=DEFAULT_SEED, method=args.method,
                                        workers=workers))

    ratios, t1s, t2s, same = [], [], [], True
    for i in range(args.repeat):
        if i % 2:
            (t2, r2), (t1, r1) = run(2), run(1)
        else:
            (t1, r1), (t2, r2) = run(1), run(2)
        same &= [o.to_dict() for o in r1.outcomes] == [o.to_dict() for o in r2.outcomes]
        t1s.append(t1)
        t2s.append(t2)
        ratios.append(t1 / t2)
    print(f"speedup_2_workers: {median(ratios):.3f}")
    print(f"seconds_1_worker: {median(t1s):.2f}")
    print(f"seconds_2_workers: {median(t2s):.2f}")
    print(f"identical_numbers: {same}")
    print(f"checks: {len(checks)}")
    print(f"seconds_building_checks: {t_build:.2f}")
    print(f"all_speedups: {', '.join(f'{r:.3f}' for r in ratios)}")
    if not args.no_cli:
        cmd = [os.path.join(os.path.dirname(sys.executable), "limitcase"), "check", "--json", os.devnull]
        t0 = time.perf_counter()
        proc = subprocess.run(cmd, capture_output=True, text=True)
        wall = time.perf_counter() - t0
        print(f"catalogue_check_seconds: {wall:.2f}")
        print(f"catalogue_check_exit_code: {proc.returncode}")
        tail = [line for line in proc.stdout.splitlines() if " checks: " in line]
        print(f"catalogue_check_summary: {tail[-1] if tail else '?'}")
    print(f"load_before: {load_before}")
    print(f"load_after: {load_text()}")


if __name__ == "__main__":
    main()
