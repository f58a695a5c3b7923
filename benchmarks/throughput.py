"""Engine throughput against raw random numbers, measured in the same run.

The engine prices an arithmetic Asian call with 52 weekly fixings (plain Monte Carlo, one
process): path-steps per second, a path-step being one simulated date of one path, all
included (streams, normals, the exact GBM step, the payoff, discounting, checks on the
cash flows, running moments). Against it: numpy's ``Generator.standard_normal`` filling a
block of the same shape, the floor any engine drawing one normal per path-step stands on.
Measurements alternate, several times; the ratio is the median of adjacent pairs (a busy
machine slows both alike).

Usage: python benchmarks/throughput.py [--paths N] [--repeat R]
Prints ``name: value`` lines; the last is ``ratio: X`` (target >= 0.7).
"""

from __future__ import annotations

import argparse
import os
import sys

import numpy as np

sys.path.insert(0, os.path.dirname(__file__))

from _common import load_text, median, timed  # noqa: E402

from limitcase import BLOCK, BlackScholes, price  # noqa: E402
from limitcase.engine import block_generator, coerce_seed  # noqa: E402
from limitcase_payoffs.asians import ArithmeticAsianCall  # noqa: E402

DATES = 52


def raw(blocks: int) -> float:
    """Seconds to draw blocks x BLOCK x DATES normals into one block-sized buffer, a new
    PCG64 stream per block as the engine has."""
    seed = coerce_seed(1)
    buf = np.empty((BLOCK, DATES, 1))

    def run() -> None:
        for b in range(blocks):
            block_generator(seed, 0, 1, b).standard_normal(out=buf)

    return timed(run)[0]


def engine(blocks: int, product, model) -> float:
    return timed(lambda: price(product, model, paths=blocks * BLOCK, seed=1, method="plain"))[0]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--paths", type=int, default=100 * BLOCK)
    ap.add_argument("--repeat", type=int, default=7)
    args = ap.parse_args()
    blocks = max(1, args.paths // BLOCK)
    steps = blocks * BLOCK * DATES
    product, model = ArithmeticAsianCall(fixings=DATES), BlackScholes()
    engine(2, product, model), raw(2)  # warm up
    ratios, e_rates, r_rates = [], [], []
    for i in range(args.repeat):
        if i % 2:
            te, tr = engine(blocks, product, model), raw(blocks)
        else:
            tr, te = raw(blocks), engine(blocks, product, model)
        e_rates.append(steps / te)
        r_rates.append(steps / tr)
        ratios.append(tr / te)
    print(f"engine_path_steps_per_second: {median(e_rates):.4g}")
    print(f"raw_normals_per_second: {median(r_rates):.4g}")
    print(f"best_ratio: {max(ratios):.3f}")
    print(f"paths: {blocks * BLOCK}")
    print(f"repeats: {args.repeat}")
    print(f"load: {load_text()}")
    print(f"ratio: {median(ratios):.3f}")


if __name__ == "__main__":
    main()
