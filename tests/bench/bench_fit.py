"""The whole ``pricefold fit`` process against the bare read it cannot avoid, measured side by side.

    python tests/bench/bench_fit.py [--rounds 3] [--sizes 2,7] [--before /path/to/other/bin/pricefold] [--dated]

Writes invented CSVs of 2M and 7M rows (30k and 100k series × 70 weeks) and a Parquet copy of the 7M
one, then runs, interleaved round after round, each as its own process:

- ``pricefold fit DATA.csv -o r.parquet -q`` against a bare ``pandas.read_csv(DATA.csv)`` process;
- ``pricefold fit DATA.parquet -o r.parquet -q`` against a bare ``pyarrow.parquet.read_table`` process
  plus the engine's own time (``fit_batch`` on the loaded rows, timed inside a process that loaded them);
- with ``--before``, the same fits by another installation (e.g. main's) in the same rounds.

Prints medians of wall time, CPU time (user + system of the process and its threads: less sensitive
to a busy machine than wall time) and peak resident memory, the ratios, and the load average.  Not a
test: these machines are shared; nothing here asserts a time.
"""
from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.bench.invented import invented_arrays  # noqa: E402

ROWS = 70
SERIES = {2: 30_000, 7: 100_000}  # millions of rows → series

PROBE = ("import resource, subprocess, sys, time; t = time.perf_counter(); "
         "subprocess.run(sys.argv[1:], check=True); u = resource.getrusage(resource.RUSAGE_CHILDREN); "
         "print(time.perf_counter() - t, u.ru_utime + u.ru_stime, u.ru_maxrss / 1024)")

ENGINE = """
import sys, time
from pathlib import Path
from fitcore import fit_batch
from fitcore.data.columns import Columns
from fitcore.data.loader import load
from fitcore.fit.settings import FitSettings
data = load(Path(sys.argv[1]), Columns())
fit_batch(load(Path(sys.argv[2]), Columns()), FitSettings())  # a small fit first: loops loaded, not timed
start = time.perf_counter()
fit_batch(data, FitSettings())
print(time.perf_counter() - start)
"""


def child(command: list[str]) -> tuple[float, float, float]:
    """(wall s, CPU s, peak MiB) of one process, measured from a fresh parent."""
    out = subprocess.run([sys.executable, "-c", PROBE, *command], capture_output=True, text=True, check=True)
    wall, cpu, peak = out.stdout.split()
    return float(wall), float(cpu), float(peak)


def write_inputs(folder: Path, millions: int, dated: bool = False) -> tuple[Path, Path]:
    import numpy as np
    import pandas as pd
    import pyarrow as pa
    import pyarrow.parquet as pq
    product, price, volume = invented_arrays(SERIES[millions], ROWS)
    frame = pd.DataFrame({"product": np.char.add("item-", product.astype(str)), "price": price, "volume": volume})
    if dated:  # a week column, ISO text, as the README's examples have (its checks cost what no plain file shows)
        weeks = (np.datetime64("2024-01-01") + 7 * np.arange(ROWS)).astype(str)
        frame["week"] = weeks[np.arange(len(frame)) % ROWS]
    csv, parquet = folder / f"rows{millions}m.csv", folder / f"rows{millions}m.parquet"
    frame.to_csv(csv, index=False)
    pq.write_table(pa.Table.from_pandas(frame, preserve_index=False), parquet)
    return csv, parquet


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--rounds", type=int, default=3)
    parser.add_argument("--sizes", default="2,7", help="millions of rows, from 2 and 7 (default: both)")
    parser.add_argument("--before", default=None, metavar="PRICEFOLD", help="another installation's pricefold")
    parser.add_argument("--dated", action="store_true", help="a week column in the data, fitted with --date week")
    args = parser.parse_args()
    dated = ["--date", "week"] if args.dated else []
    sizes = [int(size) for size in args.sizes.split(",")]
    ours = str(Path(sys.executable).parent / "pricefold")
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        inputs = {size: write_inputs(folder, size, args.dated) for size in sizes}
        small = inputs[min(sizes)][0]
        out = str(folder / "r.parquet")
        runs: dict[str, list] = {}
        plans = []
        for size, (csv, parquet) in inputs.items():
            plans += [(f"{size}M csv: read_csv", [sys.executable, "-c", f"import pandas; pandas.read_csv({str(csv)!r})"]),
                      (f"{size}M csv: fit", [ours, "fit", str(csv), *dated, "-o", out, "--quiet"])]
            if args.before:
                plans.append((f"{size}M csv: fit before", [args.before, "fit", str(csv), *dated, "-o", out, "--quiet"]))
            if size == max(sizes):
                plans += [(f"{size}M parquet: read_table",
                           [sys.executable, "-c", f"import pyarrow.parquet as pq; pq.read_table({str(parquet)!r})"]),
                          (f"{size}M parquet: fit", [ours, "fit", str(parquet), *dated, "-o", out, "--quiet"])]
                if args.before:
                    plans.append((f"{size}M parquet: fit before", [args.before, "fit", str(parquet), *dated, "-o", out,
                                                                   "--quiet"]))
        for name, command in plans:  # once, untimed: compiled loops cached, files in the page cache
            if "fit" in name:
                child(command)
        for _ in range(args.rounds):
            for name, command in plans:
                runs.setdefault(name, []).append(child(command))
            big = inputs[max(sizes)][1]
            engine = subprocess.run([sys.executable, "-c", ENGINE, str(big), str(small)], capture_output=True,
                                    text=True, check=True)
            runs.setdefault("engine", []).append((float(engine.stdout), 0.0, 0.0))
        median = {name: tuple(statistics.median(r[i] for r in values) for i in range(3)) for name, values in runs.items()}
        print(f"medians of {args.rounds} interleaved rounds; load average {os.getloadavg()[0]:.1f} "
              f"on {os.cpu_count()} cores")
        print(f"{'':28s} {'wall s':>7s} {'CPU s':>7s} {'peak MiB':>9s}")
        for name, (wall, cpu, peak) in median.items():
            print(f"{name:28s} {wall:7.2f} {cpu:7.2f} {peak:9.0f}" if name != "engine" else f"{name:28s} {wall:7.2f}")
        for size in sizes:
            bare, fit = median[f"{size}M csv: read_csv"], median[f"{size}M csv: fit"]
            print(f"{size}M rows CSV: fit / read_csv = {fit[0] / bare[0]:.2f}× wall, {fit[1] / bare[1]:.2f}× CPU, "
                  f"{fit[2] / bare[2]:.2f}× peak memory")
            if args.before:
                before = median[f"{size}M csv: fit before"]
                print(f"   before: {before[0] / bare[0]:.2f}× wall, {before[1] / bare[1]:.2f}× CPU, "
                      f"{before[2] / bare[2]:.2f}× peak memory")
        size = max(sizes)
        bare, fit, engine = median[f"{size}M parquet: read_table"], median[f"{size}M parquet: fit"], median["engine"][0]
        print(f"{size}M rows Parquet: fit {fit[0]:.2f} s vs read_table + engine = {bare[0]:.2f} + {engine:.2f} s: "
              f"{fit[0] - bare[0] - engine:+.2f} s over; peak memory {fit[2] / bare[2]:.2f}× the bare read's")
        if args.before:
            before = median[f"{size}M parquet: fit before"]
            print(f"   before: {before[0] - bare[0] - engine:+.2f} s over; peak memory {before[2] / bare[2]:.2f}×")


if __name__ == "__main__":
    main()
