"""How long reading a plan file takes: 100k series (25k products × 4 regions; ``--regions 1``: 100k products),
a plan line for each, in shuffled order, with a control column (``read_plan``; the data built in memory).

    .venv/bin/python tests/bench/bench_plan.py [--series 100000] [--regions 4] [--repeats 7] [--against OTHER_TREE]
                                              [--form plain|gzip|quoted|blank-lines]

``--form``: the file gzipped, its products quoted (so its line ends are counted), or an empty line after every
100th line.  Prints the median CPU and wall time of ``read_plan`` (pandas imported beforehand, as a fit has by then).
``--against TREE``: each repeat also runs TREE's ``fitcore`` on the same files, interleaved (this tree, then
TREE, in one subprocess each), and the ratio of the medians is printed.  Give the load average with it.
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
ALL_REGIONS = ("North", "East", "South", "West")

ONE_RUN = """
import sys, time, pickle
import numpy as np, pandas  # noqa: F401  (a fit has pandas loaded by the time it reads its plan)
from fitcore.data.dataset import from_columns
from fitcore.data.plan import read_plan
n, path = int(sys.argv[1]), sys.argv[2]
regions = np.array(sys.argv[3].split(","), dtype=object)
series = np.arange(n)
product = np.char.add("item-", (series // len(regions)).astype(str)).astype(object)
region = regions[series % len(regions)]
data = from_columns({"product": np.repeat(product, 3), "region": np.repeat(region, 3)},
                    np.tile([1.0, 2.0, 3.0], n), np.tile([9.0, 7.0, 4.0], n), controls={"promo": np.zeros(3 * n)})
cpu, wall = time.process_time(), time.perf_counter()
plan = read_plan(data, path, controls=("promo",))
cpu, wall = time.process_time() - cpu, time.perf_counter() - wall
assert np.isfinite(plan.price).all(), "every series planned"
print(cpu, wall)
"""


def write_plan(path: Path, n: int, regions: tuple[str, ...], form: str = "plain") -> None:
    import gzip

    import numpy as np
    rng = np.random.default_rng(0)
    order = rng.permutation(n)
    quote = '"' if form == "quoted" else ""
    with (gzip.open if form == "gzip" else open)(path, "wt", encoding="utf-8") as handle:
        handle.write("product,region,plan_price,promo\n")
        for i, s in enumerate(order.tolist()):
            handle.write(f"{quote}item-{s // len(regions)}{quote},{regions[s % len(regions)]},{1 + (s % 97) / 50:.2f},"
                         f"{s % 2}\n" + ("\n" if form == "blank-lines" and i % 100 == 99 else ""))


def one_run(tree: Path, n: int, plan: Path, regions: tuple[str, ...]) -> tuple[float, float]:
    env = dict(os.environ, PYTHONPATH=str(tree))
    out = subprocess.run([sys.executable, "-c", ONE_RUN, str(n), str(plan), ",".join(regions)], env=env,
                         capture_output=True, text=True, check=True)
    cpu, wall = map(float, out.stdout.split())
    return cpu, wall


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--series", type=int, default=100_000)
    parser.add_argument("--regions", type=int, default=4, choices=range(1, len(ALL_REGIONS) + 1))
    parser.add_argument("--repeats", type=int, default=7)
    parser.add_argument("--against", type=Path)
    parser.add_argument("--form", choices=("plain", "gzip", "quoted", "blank-lines"), default="plain")
    args = parser.parse_args()
    regions = ALL_REGIONS[:args.regions]
    trees = {"this": HERE} | ({"other": args.against.resolve()} if args.against else {})
    with tempfile.TemporaryDirectory() as folder:
        plan = Path(folder) / ("plan.csv.gz" if args.form == "gzip" else "plan.csv")
        write_plan(plan, args.series, regions, args.form)
        times = {name: [] for name in trees}
        for _ in range(args.repeats):
            for name, tree in trees.items():
                times[name].append(one_run(tree, args.series, plan, regions))
    print(f"read_plan, {args.series:,} plan lines ({args.form}), {args.series // len(regions):,} products; "
          f"load average {os.getloadavg()[0]:.2f}")
    medians = {}
    for name, pairs in times.items():
        cpu = statistics.median(p[0] for p in pairs)
        wall = statistics.median(p[1] for p in pairs)
        medians[name] = cpu
        print(f"  {name:5} ({trees[name]}): cpu {cpu:.3f} s, wall {wall:.3f} s (median of {len(pairs)})")
    if "other" in medians:
        print(f"  this / other CPU: {medians['this'] / medians['other']:.2f}")


if __name__ == "__main__":
    main()
