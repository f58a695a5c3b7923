"""Engine throughput against raw random numbers, measured in the same run.

The engine prices an arithmetic Asian call with 52 weekly fixings (plain Monte Carlo, one
process): path-steps per second, a path-step being one simulated date of one path, all
included (streams, normals, the exact GBM step, the payoff, discounting, checks on the
cash flows, running moments). Against it: numpy's ``Generator.standard_normal`` filling a
block of the same shape, the floor any engine drawing one normal per path-step stands on.
Measurements alternate, several times, in CPU time of this process (a busy machine
steals less of it than of the wall clock); the ratio is the median of adjacent pairs.
A breakdown follows: the shares of one engine path-step spent drawing normals, in the
model's exact GBM step (``models/gbm.py``: scale, drift, the adds over dates, ``exp``),
and in everything else (streams, payoff, discounting, cash-flow checks, moments).

Usage: python benchmarks/throughput.py [--paths N] [--repeat R]
Prints ``name: value`` lines; the last is ``ratio: X`` (target >= 0.8).
"""

from __future__ import annotations

import argparse
import os
import sys
import time

import numpy as np

sys.path.insert(0, os.path.dirname(__file__))

from _common import load_text, median  # noqa: E402

from limitcase import BLOCK, BlackScholes, price  # noqa: E402
from limitcase.engine import block_generator, coerce_seed  # noqa: E402
from limitcase.sampling import normals_buffer  # noqa: E402
from limitcase_payoffs.asians import ArithmeticAsianCall  # noqa: E402

DATES = 52


def cpu(fn) -> float:
    t0 = time.process_time()
    fn()
    return time.process_time() - t0


def raw(blocks: int) -> float:
    """Seconds to draw blocks x BLOCK x DATES normals into one block-sized buffer, a new
    PCG64 stream per block as the engine has."""
    seed = coerce_seed(1)
    buf = np.empty((BLOCK, DATES, 1))

    def run() -> None:
        for b in range(blocks):
            block_generator(seed, 0, 1, b).standard_normal(out=buf)

    return cpu(run)


def engine(blocks: int, product, model) -> float:
    return cpu(lambda: price(product, model, paths=blocks * BLOCK, seed=1, method="plain"))


def model_step(blocks: int, model) -> float:
    """CPU seconds of the model's simulate alone on the same number of blocks, on blocks
    laid out as the engine's are."""
    grid = np.arange(1, DATES + 1) / DATES
    g = np.random.default_rng(0)
    src = normals_buffer(BLOCK, DATES, 1)  # the engine's layout of a block
    g.standard_normal(out=src)
    buf = normals_buffer(BLOCK, DATES, 1)
    copy = cpu(lambda: [np.copyto(buf, src) for _ in range(blocks)])

    def run() -> None:
        for _ in range(blocks):
            np.copyto(buf, src)
            model.simulate(grid, buf, g)

    return cpu(run) - copy


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--paths", type=int, default=100 * BLOCK)
    ap.add_argument("--repeat", type=int, default=7)
    args = ap.parse_args()
    blocks = max(1, args.paths // BLOCK)
    steps = blocks * BLOCK * DATES
    product, model = ArithmeticAsianCall(fixings=DATES), BlackScholes()
    engine(2, product, model), raw(2)  # warm up
    ratios, e_rates, r_rates, shares = [], [], [], []
    for i in range(args.repeat):
        if i % 2:
            te, tr = engine(blocks, product, model), raw(blocks)
        else:
            tr, te = raw(blocks), engine(blocks, product, model)
        e_rates.append(steps / te)
        r_rates.append(steps / tr)
        ratios.append(tr / te)
        shares.append(model_step(blocks, model) / te)
    ratio = median(ratios)
    model_share = median(shares)
    print(f"engine_path_steps_per_second: {median(e_rates):.4g}")
    print(f"raw_normals_per_second: {median(r_rates):.4g}")
    print(f"best_ratio: {max(ratios):.3f}")
    print(f"share_normals: {ratio:.3f}")
    print(f"share_model_step: {model_share:.3f}")
    print(f"share_engine_and_payoff: {1 - ratio - model_share:.3f}")
    print(f"paths: {blocks * BLOCK}")
    print(f"repeats: {args.repeat}")
    print(f"load: {load_text()}")
    print(f"ratio: {median(ratios):.3f}")


if __name__ == "__main__":
    main()
