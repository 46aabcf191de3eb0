"""What the batch's journal costs: ``pricefold fit`` on 2M rows replacing its earlier results and rejects file (the
case that writes a journal), this tree against another, interleaved; then the batch step alone.

    python tests/bench/bench_batch.py --before-tree /path/to/other/checkout [--rounds 5]

Each fit is its own process run by this Python with ``PYTHONPATH`` set to one tree (so both use the same installed
libraries and numba cache): wall and CPU time (user + system) per round, the medians and their ratio.  Then, in one
process per tree, a ``Batch`` of two 1 KiB files put in place 200 times (fsyncs included): milliseconds a batch.
Prints the load average before and after.  Not a test: nothing here asserts a time.
"""
from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(HERE))

from tests.bench.invented import invented_arrays  # noqa: E402

PROBE = ("import resource, subprocess, sys, time; t = time.perf_counter(); "
         "subprocess.run(sys.argv[1:], check=True); u = resource.getrusage(resource.RUSAGE_CHILDREN); "
         "print(time.perf_counter() - t, u.ru_utime + u.ru_stime)")

BATCH = """
import sys, time
from pathlib import Path
from fitcore.outputs import Batch
folder = Path(sys.argv[1])
times = []
for i in range(200):
    t = time.perf_counter()
    with Batch() as batch:
        batch.add(folder / "r.rejects.csv", lambda h: h.write(b"x" * 1024))
        batch.add(folder / "r.json", lambda h: h.write(b"y" * 1024))
    times.append(time.perf_counter() - t)
times.sort()
print(1000 * times[len(times) // 2], 1000 * times[len(times) // 10], 1000 * times[9 * len(times) // 10])
"""


def fit(tree: Path, folder: Path, data: Path) -> tuple[float, float]:
    env = {**os.environ, "PYTHONPATH": str(tree)}
    out = subprocess.run([sys.executable, "-c", PROBE, sys.executable, "-m", "pricefold", "fit", str(data), "-o",
                          str(folder / "r.parquet"), "-q"], capture_output=True, text=True, check=True, env=env)
    wall, cpu = out.stdout.split()
    return float(wall), float(cpu)


def batch(tree: Path, folder: Path) -> str:
    env = {**os.environ, "PYTHONPATH": str(tree)}
    out = subprocess.run([sys.executable, "-c", BATCH, str(folder)], capture_output=True, text=True, check=True,
                         env=env)
    median, low, high = map(float, out.stdout.split())
    return f"{median:.2f} ms (10–90%: {low:.2f}–{high:.2f})"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--before-tree", type=Path, required=True, metavar="CHECKOUT")
    parser.add_argument("--rounds", type=int, default=5)
    args = parser.parse_args()
    import numpy as np
    import pandas as pd
    print(f"load average {os.getloadavg()}")
    with tempfile.TemporaryDirectory() as scratch:
        scratch = Path(scratch)
        product, price, volume = invented_arrays(30_000, 70)
        frame = pd.DataFrame({"product": np.char.add("item-", product.astype(str)), "price": price, "volume": volume})
        data = scratch / "rows2m.csv"
        frame.to_csv(data, index=False)
        with open(data, "a") as handle:
            handle.write("item-1,-1,2\n")  # one rejected row: a rejects file, so the earlier pair is replaced
        trees = {"before": args.before_tree, "this": HERE}
        folders = {name: scratch / name for name in trees}
        times = {name: [] for name in trees}
        for name in trees:
            folders[name].mkdir()
            fit(trees[name], folders[name], data)  # the pair each later round replaces (and numba's cache warm)
        for _ in range(args.rounds):
            for name, tree in trees.items():
                times[name].append(fit(tree, folders[name], data))
        for name in trees:
            walls, cpus = zip(*times[name])
            print(f"{name}: wall {statistics.median(walls):.2f} s ({min(walls):.2f}–{max(walls):.2f}), "
                  f"CPU {statistics.median(cpus):.2f} s ({min(cpus):.2f}–{max(cpus):.2f})")
        ratio = [this[1] / before[1] for this, before in zip(times["this"], times["before"])]
        print(f"CPU this/before, pair by pair: {', '.join(f'{r:.3f}' for r in ratio)}")
        for name, tree in trees.items():
            (folders[name] / "small").mkdir()
            print(f"{name}: a batch of two 1 KiB files put in place: {batch(tree, folders[name] / 'small')}")
    print(f"load average {os.getloadavg()}")


if __name__ == "__main__":
    main()
