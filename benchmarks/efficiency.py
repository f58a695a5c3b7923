"""Variance-reduction efficiency on an arithmetic Asian call.

Efficiency of a method = 1 / (variance x time): the precision bought per second. The
figure printed is ``(var x time of plain MC) / (var x time of the best method)`` for an
arithmetic Asian call with 52 weekly fixings, at the money (S0 = K = 100), sigma 0.2, one
year, r = 0.05, q = 0.02 (BlackScholes defaults). Each method prices the same number of
paths with several seeds; variance is the mean of the squared standard errors the
engine reports, time the median CPU time of this process (a busy machine steals less of
it than of the wall clock), everything included
(pilot paths for the control coefficient, construction of the 32 Sobol scrambles, which
are built afresh for every timed run).

With ``--others``, the same table for a few other catalogue products (a discretely
monitored barrier, a digital, a floating lookback, a Longstaff-Schwartz Bermudan put),
each under its own scenario, to see how close ``auto`` (control variates with Sobol
points) comes to the best method there.

Usage: python benchmarks/efficiency.py [--paths N] [--seeds S] [--others]
Prints ``vr_efficiency_asian: X`` (target >= 500) and one line per method.
"""

from __future__ import annotations

import argparse
import os
import sys
import time

sys.path.insert(0, os.path.dirname(__file__))

from _common import asian_with_control, load_text, median  # noqa: E402

from limitcase import BLOCK, BlackScholes, price  # noqa: E402
from limitcase import sampling  # noqa: E402

METHODS = ("plain", "antithetic", "sobol", "control", "control+antithetic", "control+sobol")


def measure(product, model, method: str, paths: int, seeds: int) -> tuple[float, float, float]:
    times, variances, values = [], [], []
    for seed in range(seeds):
        sampling._ENGINES.clear()  # every timed run pays for its own scrambles and blocks
        sampling._BLOCKS.clear()
        sampling._BLOCK_BYTES[0] = 0
        t0 = time.process_time()
        est = price(product, model, paths=paths, seed=100 + seed, method=method)
        t = time.process_time() - t0
        times.append(t)
        variances.append(est.stderr**2)
        values.append(est.value)
    return median(times), sum(variances) / len(variances), sum(values) / len(values)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--paths", type=int, default=64 * BLOCK)
    ap.add_argument("--seeds", type=int, default=5)
    ap.add_argument("--others", action="store_true")
    args = ap.parse_args()
    product, origin = asian_with_control(52)
    model = BlackScholes()
    price(product, model, paths=BLOCK, seed=0, method="control+sobol")  # imports, warm caches
    results = {m: measure(product, model, m, args.paths, args.seeds) for m in METHODS}
    t0, v0, _ = results["plain"]
    eff = {m: (v0 * t0) / (v * t) for m, (t, v, _) in results.items()}
    best = max(eff, key=eff.get)
    print(f"vr_efficiency_asian: {eff[best]:.4g}")
    print(f"best_method: {best}")
    for m, (t, v, value) in results.items():
        name = m.replace("+", "_")
        print(f"efficiency_{name}: {eff[m]:.4g}")
        print(f"stderr_{name}: {v ** 0.5:.3g}")
        print(f"seconds_{name}: {t:.3f}")
        print(f"price_{name}: {value:.5f}")
    print(f"paths: {args.paths}")
    print(f"seeds: {args.seeds}")
    print(f"load: {load_text()}")
    print(f"product: {origin}")
    if args.others:
        others(args.paths, args.seeds)


def others(paths: int, seeds: int) -> None:
    from limitcase_payoffs.barriers import UpAndOutCall
    from limitcase_payoffs.bermudan import BermudanPut
    from limitcase_payoffs.digitals import CashOrNothingCall
    from limitcase_payoffs.lookbacks import FloatingLookbackCall

    for product in (UpAndOutCall(), CashOrNothingCall(), FloatingLookbackCall(), BermudanPut()):
        model = product.scenario()
        res = {m: measure(product, model, m, paths, seeds) for m in METHODS}
        t0, v0, _ = res["plain"]
        eff = {m: (v0 * t0) / (v * t) for m, (t, v, _) in res.items()}
        best = max(eff, key=eff.get)
        text = ", ".join(f"{m} {e:.3g}" for m, e in eff.items())
        print(f"{product.label()}: best {best} ({eff[best]:.3g}); auto {eff['control+sobol']:.3g}; {text}")


if __name__ == "__main__":
    main()
