"""A stand-alone path simulator for the external-model tests: geometric Brownian motion
(Black and Scholes 1973) written with the Python standard library only, as a simulator in
another language would be, writing limitcase's path array file (docs/simulator-files.md).

    python gbm_simulator.py --seed S --paths N --times FILE --out FILE
                            --spot 100 --rate 0.05 --dividend 0.02 --vol 0.2 [--bug NAME]

``--bug`` makes it misbehave on purpose: ``no-dividend`` (drift r instead of r - q),
``nan`` (one price NaN), ``shape`` (one path too few), ``exit`` (status 3 with a message),
``sleep`` (never finishes in time), ``header`` (a wrong magic).
"""

import argparse
import math
import random
import struct
import sys
import time
from array import array


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--seed", type=int, required=True)
    ap.add_argument("--paths", type=int, required=True)
    ap.add_argument("--times", required=True)
    ap.add_argument("--out", required=True)
    ap.add_argument("--spot", type=float, default=100.0)
    ap.add_argument("--rate", type=float, default=0.05)
    ap.add_argument("--dividend", type=float, default=0.02)
    ap.add_argument("--vol", type=float, default=0.2)
    ap.add_argument("--bug", default="none")
    a = ap.parse_args()
    if a.bug == "exit":
        print("gbm_simulator: cannot open the volatility surface", file=sys.stderr)
        return 3
    if a.bug == "sleep":
        time.sleep(60)
    with open(a.times) as fh:
        times = [float(line) for line in fh if line.strip()]
    drift_rate = a.rate if a.bug == "no-dividend" else a.rate - a.dividend
    gen = random.Random(a.seed)
    paths = a.paths - 1 if a.bug == "shape" else a.paths
    prices = array("d")
    variances = array("d")
    for _ in range(paths):
        x, prev = math.log(a.spot), 0.0
        for t in times:
            dt = t - prev
            x += (drift_rate - 0.5 * a.vol * a.vol) * dt + a.vol * math.sqrt(dt) * gen.gauss(0.0, 1.0)
            prices.append(math.exp(x))
            variances.append(a.vol * a.vol * dt)
            prev = t
    if a.bug == "nan":
        prices[len(prices) // 2] = float("nan")
    if sys.byteorder == "big":  # the file is little-endian whatever the machine
        prices.byteswap()
        variances.byteswap()
    magic = b"XXPATHS1" if a.bug == "header" else b"LCPATHS1"
    with open(a.out, "wb") as fh:
        fh.write(struct.pack("<8sIIII", magic, paths, len(times), 1, 2))
        prices.tofile(fh)
        variances.tofile(fh)
    return 0


if __name__ == "__main__":
    sys.exit(main())
