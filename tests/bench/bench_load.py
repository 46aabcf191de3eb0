"""Peak memory and time of ``pricefold fit`` on a large CSV (7M rows, 100k series by default).

    python tests/bench/bench_load.py [--series 100000] [--interleave]

Writes an invented CSV, runs the whole command as a child process and reports
its wall time and peak resident memory (``resource.getrusage``), next to a
bare ``pandas.read_csv`` of the same file.  Not a test: machines are noisy.
"""
from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.bench.invented import invented_arrays  # noqa: E402


def child(command: list[str]) -> tuple[float, float]:
    """(seconds, peak MiB) of one child process; each measured in a fresh grandchild."""
    probe = ("import resource, subprocess, sys, time; t = time.perf_counter(); "
             "subprocess.run(sys.argv[1:], check=True); "
             "print(time.perf_counter() - t, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024)")
    out = subprocess.run([sys.executable, "-c", probe, *command], capture_output=True, text=True, check=True)
    seconds, peak = out.stdout.split()
    return float(seconds), float(peak)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--series", type=int, default=100_000)
    parser.add_argument("--interleave", action="store_true", help="shuffle rows so series arrive interleaved")
    args = parser.parse_args()
    product, price, volume = invented_arrays(args.series)
    frame = pd.DataFrame({"product": np.char.add("item-", product.astype(str)), "price": price, "volume": volume})
    if args.interleave:
        frame = frame.sample(frac=1.0, random_state=0)
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "big.csv"
        start = time.perf_counter()
        frame.to_csv(path, index=False)
        del frame
        size = path.stat().st_size / 2 ** 20
        print(f"wrote {len(product):,} rows ({size:,.0f} MiB) in {time.perf_counter() - start:.1f} s"
              f"{' (interleaved)' if args.interleave else ''}")
        ours = child([sys.executable, "-m", "pricefold", "fit", str(path), "-o", str(Path(folder) / "r.parquet"),
                      "--quiet"])
        bare = child([sys.executable, "-c", f"import pandas; pandas.read_csv({str(path)!r})"])
        print(f"pricefold fit (whole process): {ours[0]:.1f} s, peak memory {ours[1]:,.0f} MiB")
        print(f"pandas.read_csv alone:         {bare[0]:.1f} s, peak memory {bare[1]:,.0f} MiB")
        print(f"ratio of times {ours[0] / bare[0]:.2f}; ratio of peak memory {ours[1] / bare[1]:.2f}")


if __name__ == "__main__":
    main()
