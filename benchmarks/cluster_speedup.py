"""Speed-up of the catalogue check on two local Dask workers over one process.

Builds every check of the shipped catalogue once, then runs them with the ``check``
command's defaults (method auto, seed 20261201; ``--paths`` per check) in this process and
on a Dask cluster of two worker processes on the loopback address
(:func:`limitcase.cluster.use_scheduler`, ``local:2``), alternating, ``--repeat`` times; the
speed-up is the median of t(one process) / t(two Dask workers) over adjacent pairs. The
cluster is started (and its workers given one small warm-up run, the imports) before the
timing; its start-up time is printed apart. The numbers of both runs are compared: they
must be identical.

Needs ``distributed`` (``pip install 'limitcase[dask]'``). The machine should be otherwise
quiet: the load average is printed beside the figures.

Usage: python benchmarks/distributed.py [--paths N] [--repeat R] [--select TEXT]
Prints ``distributed_speedup_2_workers: X`` (target >= 1.7) first.
"""

from __future__ import annotations

import argparse
import os
import sys
from contextlib import contextmanager

sys.path.insert(0, os.path.dirname(__file__))

from _common import load_text, median, timed  # noqa: E402

from limitcase.cli_support import select_checks  # noqa: E402
from limitcase.cluster import use_scheduler  # noqa: E402
from limitcase.loader import load_products  # noqa: E402
from limitcase.reduce import checks_for  # noqa: E402
from limitcase.settings import DEFAULT_PATHS, DEFAULT_SEED  # noqa: E402
from limitcase.suite import run_checks  # noqa: E402
from limitcase.workers import pop_backend, push_backend  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--paths", type=int, default=DEFAULT_PATHS)
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--select", action="append", default=[])
    ap.add_argument("--method", default="auto")
    args = ap.parse_args()
    load_before = load_text()
    checks = select_checks([c for p in load_products() for c in checks_for(p)], args.select)

    def run():
        return timed(lambda: run_checks(checks, paths=args.paths, seed=DEFAULT_SEED, method=args.method,
                                        workers=1))

    with use_scheduler("local:2") as backend:
        t_start, _ = timed(lambda: backend.client)
        t_warm, _ = timed(lambda: run_checks(checks[:8], paths=2000, seed=1, workers=1))
        ratios, t1s, t2s, same = [], [], [], True
        for i in range(args.repeat):
            if i % 2:
                (t2, r2) = run()
                with _local(backend):
                    (t1, r1) = run()
            else:
                with _local(backend):
                    (t1, r1) = run()
                (t2, r2) = run()
            same &= [o.to_dict() for o in r1.outcomes] == [o.to_dict() for o in r2.outcomes]
            t1s.append(t1)
            t2s.append(t2)
            ratios.append(t1 / t2)
    print(f"distributed_speedup_2_workers: {median(ratios):.3f}")
    print(f"seconds_one_process: {median(t1s):.2f}")
    print(f"seconds_2_dask_workers: {median(t2s):.2f}")
    print(f"identical_numbers: {same}")
    print(f"checks: {len(checks)}")
    print(f"paths: {args.paths}")
    print(f"seconds_cluster_start: {t_start:.2f}")
    print(f"seconds_warm_up: {t_warm:.2f}")
    print(f"all_speedups: {', '.join(f'{r:.3f}' for r in ratios)}")
    print(f"load_before: {load_before}")
    print(f"load_after: {load_text()}")


@contextmanager
def _local(backend):
    """Within the block, pools are this process's again (the cluster stays up)."""
    pop_backend(backend)
    try:
        yield
    finally:
        push_backend(backend)


if __name__ == "__main__":
    main()
