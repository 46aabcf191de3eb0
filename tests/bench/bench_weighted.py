"""The engine on a weighted 2M-row fit (30k series × 70 weeks), for one or two checkouts side by side.

    python tests/bench/bench_weighted.py [--rounds 5] [--other /path/to/other/checkout]

Each run is its own process running ``fit_batch`` on invented series (``invented.invented_arrays``) with
weights drawn in [0.5, 3], in three layouts: 5 shuffled folds, 5 folds in file order with each series'
first 10 weeks weighing 0, and leave-one-out with the same zeros.  The process times one call after a small
warm-up fit (numba's loops loaded), as CPU time of the process (every thread) and wall time.  With
``--other``, that checkout's code (``PYTHONPATH``) runs the same, interleaved round after round.  Prints the
median of each and the ratio, and the load average.  Not a test: nothing here asserts a time.
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

PROBE = r'''
import json, resource, sys, time
import numpy as np
sys.path.insert(0, sys.argv[1])
import fitcore
from tests.bench.invented import invented_arrays
settings = {"shuffled": dict(folds=5), "given, zeros": dict(folds=5, fold_order="given"),
            "loo, zeros": dict(folds="loo")}[sys.argv[2]]
def dataset(n_series):
    product, price, volume = invented_arrays(n_series)
    weight = np.random.default_rng(1).uniform(0.5, 3.0, len(price)).round(2)
    if "zeros" in sys.argv[2]:
        weight[np.arange(len(price)) % 70 < 10] = 0.0
    return fitcore.from_columns({"product": np.char.add("item-", product.astype(str)).astype(object)}, price,
                                volume, weight=weight)
fitcore.fit_batch(dataset(200), fitcore.FitSettings(**settings))
data = dataset(30_000)
def cpu():
    used = resource.getrusage(resource.RUSAGE_SELF)
    return used.ru_utime + used.ru_stime
wall, used = time.perf_counter(), cpu()
fitcore.fit_batch(data, fitcore.FitSettings(**settings))
print(json.dumps({"wall": time.perf_counter() - wall, "cpu": cpu() - used}))
'''

LAYOUTS = ("shuffled", "given, zeros", "loo, zeros")


def run(checkout: Path, layout: str) -> dict:
    env = dict(os.environ, PYTHONPATH=str(checkout))
    out = subprocess.run([sys.executable, "-c", PROBE, str(checkout), layout], env=env, check=True,
                         capture_output=True, text=True, cwd=checkout)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--rounds", type=int, default=5)
    parser.add_argument("--other", type=Path)
    args = parser.parse_args()
    checkouts = {"this": ROOT} | ({"other": args.other.resolve()} if args.other else {})
    times = {(name, layout): [] for name in checkouts for layout in LAYOUTS}
    loads = [os.getloadavg()[0]]
    for _ in range(args.rounds):
        for layout in LAYOUTS:
            for name, checkout in checkouts.items():
                times[name, layout].append(run(checkout, layout))
        loads.append(os.getloadavg()[0])
    for layout in LAYOUTS:
        line = []
        for name in checkouts:
            cpu = statistics.median(t["cpu"] for t in times[name, layout])
            wall = statistics.median(t["wall"] for t in times[name, layout])
            line.append(f"{name} CPU {cpu:.3f} s, wall {wall:.3f} s")
        if args.other:
            ratio = (statistics.median(t["cpu"] for t in times["this", layout])
                     / statistics.median(t["cpu"] for t in times["other", layout]))
            line.append(f"this/other CPU {ratio:.3f}")
        print(f"{layout:>13}: " + "; ".join(line))
    print(f"load average (1 min) during the rounds: {min(loads):.2f}–{max(loads):.2f}")


if __name__ == "__main__":
    main()
