"""The load stage alone, in-process: ``load_with_rejects`` on given files, this installation and another.

    python tests/bench/bench_load_stage.py DATA [DATA ...] [--before OTHER/.venv/bin/python] [--rounds 3]

Each round runs one fresh process per installation (interleaved), which imports numpy, pandas and
pyarrow first (a fit's warm-up thread has them by then), then loads each file and prints the CPU time
of the load (every thread: pyarrow's readers, the digest), its wall time, the resident memory before,
at its peak (sampled every millisecond) and after (the Dataset still held).  Medians, and the load
average.  Not a test: these machines are shared.
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile

PROBE = r"""
import json, sys, threading, time
peak = [0]
def rss():
    with open('/proc/self/statm') as f:
        return int(f.read().split()[1]) * 4096 / 2 ** 20
def sample():
    while True:
        peak[0] = max(peak[0], rss())
        time.sleep(0.001)
import numpy, pandas, pyarrow, pyarrow.csv, pyarrow.parquet, pyarrow.compute  # noqa: F401
from fitcore.data.columns import Columns
from fitcore.data.loader import load_with_rejects
threading.Thread(target=sample, daemon=True).start()
out = {}
for path in sys.argv[1:]:
    time.sleep(0.01)
    before = peak[0] = rss()
    cpu, wall = time.process_time(), time.perf_counter()
    data, rejects = load_with_rejects(path, Columns())
    cpu, wall = time.process_time() - cpu, time.perf_counter() - wall
    time.sleep(0.01)
    out[path] = (cpu, wall, before, peak[0], rss())
    del data, rejects
print(json.dumps(out))
"""


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("data", nargs="+")
    parser.add_argument("--before", default=None, metavar="PYTHON", help="another installation's Python")
    parser.add_argument("--rounds", type=int, default=3)
    args = parser.parse_args()
    pythons = {"now": sys.executable, **({"before": args.before} if args.before else {})}
    runs: dict[tuple[str, str], list] = {}
    for _ in range(args.rounds):
        for who, python in pythons.items():
            # run from a neutral folder: ``-c`` puts the working folder first on the path, which would
            # import this checkout's fitcore into the other installation
            found = json.loads(subprocess.run([python, "-c", PROBE, *map(os.path.abspath, args.data)],
                                              capture_output=True, text=True, check=True,
                                              cwd=tempfile.gettempdir()).stdout)
            for path, figures in found.items():
                runs.setdefault((os.path.basename(path), who), []).append(figures)
    print(f"medians of {args.rounds} interleaved rounds; load average {os.getloadavg()[0]:.1f} "
          f"on {os.cpu_count()} cores")
    print(f"{'':28s} {'CPU s':>6s} {'wall s':>6s} {'MiB before':>10s} {'peak':>6s} {'after':>6s}")
    for (name, who), figures in runs.items():
        cpu, wall, before, peak, after = (statistics.median(f[i] for f in figures) for i in range(5))
        print(f"{name + ' ' + who:28s} {cpu:6.2f} {wall:6.2f} {before:10.0f} {peak:6.0f} {after:6.0f}")


if __name__ == "__main__":
    main()
