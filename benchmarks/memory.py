"""Peak memory of a long run: 10 million paths x 252 dates of one product.

A subprocess prices an arithmetic Asian call with 252 daily fixings on 10,000,000 paths
(2.5 billion path-dates, 20 GB if the paths were held at once) and reports its peak
resident set (``resource.getrusage(RUSAGE_SELF).ru_maxrss``: interpreter, numpy, scipy
and the catalogue included). The engine makes and consumes blocks of 4096 paths, so the
figure does not depend on the path count; the resident set after the imports is printed
for comparison.

Usage: python benchmarks/memory.py [--paths N] [--method M]
Prints ``peak_memory_mb: X`` (target <= 300) first.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys

sys.path.insert(0, os.path.dirname(__file__))

from _common import load_text  # noqa: E402

SCRIPT = r"""
import resource, sys, time
from limitcase import BlackScholes, price
from limitcase_payoffs.asians import ArithmeticAsianCall
imports = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
t0 = time.perf_counter()
e = price(ArithmeticAsianCall(fixings=252), BlackScholes(), paths=int(sys.argv[1]), seed=1, method=sys.argv[2])
wall = time.perf_counter() - t0
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(peak / 1024, imports / 1024, wall, e.value, e.stderr, e.paths)
"""


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--paths", type=int, default=10_000_000)
    ap.add_argument("--method", default="plain")
    args = ap.parse_args()
    out = subprocess.run([sys.executable, "-c", SCRIPT, str(args.paths), args.method], capture_output=True,
                         text=True, check=True)
    peak, imports, wall, value, se, paths = out.stdout.split()
    print(f"peak_memory_mb: {float(peak):.1f}")
    print(f"memory_after_imports_mb: {float(imports):.1f}")
    print(f"seconds: {float(wall):.1f}")
    print(f"paths: {paths}")
    print(f"dates: 252")
    print(f"method: {args.method}")
    print(f"price: {float(value):.5f} +/- {float(se):.2g}")
    print(f"load: {load_text()}")


if __name__ == "__main__":
    main()
