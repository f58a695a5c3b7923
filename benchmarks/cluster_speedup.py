"""Speed-up of the catalogue check on two local Dask workers over one process.

The figure is the one the distributed backend is held to: wall time of the catalogue check
in **one process** (``workers=1``: no pool, what ``limitcase check --workers 1`` does) over
its wall time on a Dask cluster of **two worker processes** on the loopback address
(:func:`limitcase.cluster.use_scheduler`, ``local:2``; one thread each). It is one core
against two, so 2 is the ceiling on an idle 2-core machine and the target is 1.7: what the
backend may cost (scheduling, sending the run's checks, the client's and the scheduler's
work in this process) is the gap. It is not a comparison of Dask with the local pool of two
forked workers (two cores against two); ``--forked`` adds that run (``workers=2``, no
scheduler) as context.

Builds every check of the shipped catalogue once, then runs them with the ``check``
command's defaults (method auto, seed 20261201; ``--paths`` per check) in this process and
on the cluster, alternating, ``--repeat`` times; the speed-up is the median of
t(one process) / t(two Dask workers) over adjacent pairs. The cluster is started (and its
workers given one small warm-up run of one check per product module: the imports) before the timing; its start-up time is
printed apart. The numbers of both runs are compared: they must be identical.

CPU seconds are measured beside wall time, because the machine may be shared: another
program's load stretches wall time but not CPU time. One process: this process's CPU.
Dask: this process's (the client, and the scheduler and nannies of a local cluster) plus
the two worker processes'. ``cpu_dask_over_one_process`` is their ratio (1.0: the backend
costs nothing); on two otherwise idle cores the wall speed-up can be at most about
2 / that ratio.

Needs ``distributed`` (``pip install 'limitcase[dask]'``). The machine should be otherwise
quiet: the load average is printed beside the figures.

Usage: python benchmarks/cluster_speedup.py [--paths N] [--repeat R] [--select TEXT] [--forked]
Prints ``distributed_speedup_2_workers: X`` (target >= 1.7) first.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from contextlib import contextmanager

sys.path.insert(0, os.path.dirname(__file__))

from _common import load_text, median  # noqa: E402

from limitcase.cli_support import select_checks  # noqa: E402
from limitcase.cluster import use_scheduler  # noqa: E402
from limitcase.loader import load_products  # noqa: E402
from limitcase.reduce import checks_for  # noqa: E402
from limitcase.settings import DEFAULT_PATHS, DEFAULT_SEED  # noqa: E402
from limitcase.suite import run_checks  # noqa: E402
from limitcase.workers import pop_backend, push_backend  # noqa: E402


def main() -> None:
    import psutil  # a dependency of distributed

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--paths", type=int, default=DEFAULT_PATHS)
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--select", action="append", default=[])
    ap.add_argument("--method", default="auto")
    ap.add_argument("--forked", action="store_true", help="also time the local pool of two forked workers")
    args = ap.parse_args()
    load_before = load_text()
    checks = select_checks([c for p in load_products() for c in checks_for(p)], args.select)
    here = psutil.Process()

    def cpu(procs, children: bool = False) -> float:
        """CPU seconds of ``procs`` (with ``children``: and of their children reaped)."""
        total = 0.0
        for p in procs:
            t = p.cpu_times()
            total += t.user + t.system + ((t.children_user + t.children_system) if children else 0.0)
        return total

    def run(procs, workers=1):
        """(wall, cpu of procs, result) of one catalogue run."""
        c0, t0 = cpu(procs), time.perf_counter()
        result = run_checks(checks, paths=args.paths, seed=DEFAULT_SEED, method=args.method, workers=workers)
        return time.perf_counter() - t0, cpu(procs) - c0, result

    with use_scheduler("local:2") as backend:
        t0 = time.perf_counter()
        backend.client  # noqa: B018 - starts the cluster
        t_start = time.perf_counter() - t0
        t0 = time.perf_counter()
        # one check of each product module: the workers import what the timed runs will use
        firsts = list({(type(c.legs[0]).__module__ if c.legs else "", type(c.model).__name__): c
                       for c in reversed(checks)}.values())
        run_checks(firsts, paths=2000, seed=1, workers=1)
        t_warm = time.perf_counter() - t0
        workers = [psutil.Process(pid) for pid in backend.client.run(os.getpid).values()]
        w0 = [cpu([w]) for w in workers]
        ratios, t1s, t2s, c1s, c2s, c2main, same = [], [], [], [], [], [], True
        for i in range(args.repeat):
            if i % 2:
                t2, c2, r2 = run([here] + workers)
                with _local(backend):
                    t1, c1, r1 = run([here])
            else:
                with _local(backend):
                    t1, c1, r1 = run([here])
                cm0 = cpu([here])
                t2, c2, r2 = run([here] + workers)
                c2main.append(cpu([here]) - cm0)
            same &= [o.to_dict() for o in r1.outcomes] == [o.to_dict() for o in r2.outcomes]
            t1s.append(t1)
            t2s.append(t2)
            c1s.append(c1)
            c2s.append(c2)
            ratios.append(t1 / t2)
        worker_cpu = [cpu([w]) - a for w, a in zip(workers, w0)]
    forked = None
    same_forked = None
    if args.forked:
        c0, t0 = cpu([here], children=True), time.perf_counter()
        rf = run_checks(checks, paths=args.paths, seed=DEFAULT_SEED, method=args.method, workers=2)
        forked = (time.perf_counter() - t0, cpu([here], children=True) - c0)  # the workers are reaped: children
        same_forked = [o.to_dict() for o in rf.outcomes] == [o.to_dict() for o in r1.outcomes]
    print(f"distributed_speedup_2_workers: {median(ratios):.3f}")
    print(f"seconds_one_process: {median(t1s):.2f}")
    print(f"seconds_2_dask_workers: {median(t2s):.2f}")
    print(f"identical_numbers: {same}")
    print(f"cpu_seconds_one_process: {median(c1s):.2f}")
    print(f"cpu_seconds_dask_total: {median(c2s):.2f}")
    print(f"cpu_seconds_dask_this_process: {median(c2main):.2f}")
    print(f"cpu_seconds_dask_workers_all_runs: {', '.join(f'{c:.2f}' for c in worker_cpu)}")
    print(f"cpu_dask_over_one_process: {median(c2s) / median(c1s):.3f}")
    if forked is not None:
        print(f"seconds_2_forked_workers: {forked[0]:.2f}")
        print(f"cpu_seconds_2_forked_workers: {forked[1]:.2f}")
        print(f"speedup_forked_2_workers: {median(t1s) / forked[0]:.3f}")
        print(f"identical_numbers_forked: {same_forked}")
    print(f"checks: {len(checks)}")
    print(f"paths: {args.paths}")
    print(f"seconds_cluster_start: {t_start:.2f}")
    print(f"seconds_warm_up: {t_warm:.2f}")
    print(f"all_speedups: {', '.join(f'{r:.3f}' for r in ratios)}")
    print(f"all_seconds_one_process: {', '.join(f'{t:.2f}' for t in t1s)}")
    print(f"all_seconds_2_dask_workers: {', '.join(f'{t:.2f}' for t in t2s)}")
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
