"""Every catalogue check at a high path count over several seeds: prints the failures.

Usage::

    python benchmarks/high_paths.py [PATH ...] [--paths 1000000] [--seeds 1,2,3,4,5]
        [--select TEXT ...] [--workers N] [--out DIR]

Runs ``limitcase check`` (the command a user runs, with its defaults otherwise) once per
seed and reads its JSON file. Prints one ``fail: product/case seed value reference
difference stderr allowance`` line per failing or erroring case, a ``shortfall:`` line per
early-exercise case against a lattice (the basis of the declared Longstaff-Schwartz
allowances: reference minus value, largest over the seeds), and ``failures: N`` last.
A check with a bias the run does not declare fails here long before it fails at the
default 100 000 paths. Heavy: the whole catalogue at a million paths is minutes per seed
on two cores.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
from collections import defaultdict


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("paths_", nargs="*", metavar="PATH", help="product files or folders (default: the catalogue)")
    ap.add_argument("--paths", type=int, default=1_000_000)
    ap.add_argument("--seeds", default="1,2,3,4,5")
    ap.add_argument("--select", action="append", default=[])
    ap.add_argument("--workers", type=int, default=None)
    ap.add_argument("--out", default=None, help="keep the JSON files in this folder")
    args = ap.parse_args(argv)
    seeds = [int(x) for x in args.seeds.split(",") if x.strip()]
    out = args.out or tempfile.mkdtemp(prefix="limitcase-high-paths-")
    os.makedirs(out, exist_ok=True)
    failures = 0
    shortfall: dict[str, list[tuple[int, float, float]]] = defaultdict(list)
    for seed in seeds:
        path = os.path.join(out, f"seed{seed}.json")
        cmd = [sys.executable, "-m", "limitcase.cli", "check", *args.paths_, "--paths", str(args.paths),
               "--seed", str(seed), "--json", path]
        for sel in args.select:
            cmd += ["--select", sel]
        if args.workers:
            cmd += ["--workers", str(args.workers)]
        proc = subprocess.run(cmd, capture_output=True, text=True)
        if proc.returncode not in (0, 1) or not os.path.exists(path):
            print(f"error: seed {seed}: exit {proc.returncode}: {proc.stderr.strip()[-400:]}")
            failures += 1
            continue
        with open(path, encoding="utf-8") as fh:
            doc = json.load(fh)
        for c in doc["cases"]:
            name = f"{c['product']}/{c['case']}"
            if c["verdict"] != "pass":
                failures += 1
                print(f"fail: {name} seed {seed} verdict {c['verdict']} value {c['value']} reference "
                      f"{c['reference']} difference {c['difference']} stderr {c['stderr']} "
                      f"allowance {c['allowance']} {c.get('message') or ''}".rstrip())
            if c["case"].startswith("lattice") and c["value"] is not None:
                shortfall[name].append((seed, c["reference"] - c["value"], c["stderr"]))
        print(f"seed {seed}: {doc['summary']}")
    for name, rows in sorted(shortfall.items()):
        worst = max(rows, key=lambda r: r[1])
        text = ", ".join(f"{d:.4f}+/-{e:.4f}" for _, d, e in rows)
        print(f"shortfall: {name} max {worst[1]:.4f} (seed {worst[0]}); per seed {text}")
    print(f"json: {out}")
    print(f"failures: {failures}")
    return 1 if failures else 0


if __name__ == "__main__":
    raise SystemExit(main())
