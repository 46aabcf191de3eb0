"""Where a ``pricefold fit`` process's time goes, phase by phase, for one or two installations side by side.

    python tests/bench/fit_phases.py DATA [DATA ...] [--rounds 4] [--python OTHER/.venv/bin/python]

Each run is its own process: ``pricefold fit DATA -o OUT.parquet -q`` through ``pricefold.cli.main``, with
time marks (wall clock from the process's start, and the process's CPU time, every thread) around its
phases: imports, then options, the outputs' check and the load, the fit, the diagnosis (with what runs
beside it), the results prepared, the slices built and written, the files synced and put in place.  With ``--python``, another
installation's interpreter runs the same, interleaved round after round (its own code: each run starts in an
empty folder, so a checkout's code never shadows an installation's).  Prints the median of each phase's wall
and CPU time, the whole process's wall time, and the load average.  Not a test: nothing here asserts a time.
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time

PROBE = r'''
import json, os, resource, sys, time
start = time.perf_counter()
def cpu():
    used = resource.getrusage(resource.RUSAGE_SELF)
    return used.ru_utime + used.ru_stime
marks = [("start", 0.0, cpu())]
def mark(name):
    marks.append((name, time.perf_counter() - start, cpu()))
def around(module, attribute, name):
    function = getattr(module, attribute)
    def timed(*args, **kwargs):
        try:
            return function(*args, **kwargs)
        finally:
            mark(name)
    setattr(module, attribute, timed)
import pricefold.cli as cli
import pricefold.fit_run as fit_run
import fitcore.data.loader as loader
import fitcore.results.write as write
import fitcore.review.flags as flags
import fitcore
mark("imports")
around(loader, "load_with_rejects", "load")
around(fitcore, "fit_batch", "fit")  # (the warm-up's fit and diagnosis marked too: the last mark is the run's)
around(flags, "diagnose", "diagnosis")
around(write, "prepared_results", "prepared")
around(write, "write_parquet_slices", "built and written")
around(fit_run, "_fit_locally", "synced and in place")
code = cli.main(sys.argv[1:])
mark("end")
print(json.dumps(marks))
os._exit(code)
'''
PHASES = ["imports", "load", "fit", "diagnosis", "prepared", "built and written", "synced and in place"]


def one_run(python: str, data: str, folder: str) -> dict:
    """Phase → (wall s, CPU s) of one process, and "process" → its whole wall time."""
    started = time.perf_counter()
    out = subprocess.run([python, "-c", PROBE, "fit", data, "-o", os.path.join(folder, "r.parquet"), "-q"],
                         capture_output=True, text=True, check=True, cwd=folder)
    whole = time.perf_counter() - started
    marks = {name: (wall, cpu) for name, wall, cpu in json.loads(out.stdout.strip().splitlines()[-1])}
    phases, before = {}, marks["start"]
    for name in PHASES:
        wall, cpu = marks[name]
        phases[name] = (wall - before[0], cpu - before[1])
        before = marks[name]
    phases["process"] = (whole, 0.0)
    return phases


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("data", nargs="+")
    parser.add_argument("--rounds", type=int, default=4)
    parser.add_argument("--python", default=None, metavar="PYTHON", help="another installation's interpreter")
    args = parser.parse_args()
    pythons = {"this": sys.executable} | ({"other": args.python} if args.python else {})
    with tempfile.TemporaryDirectory() as folder:
        for data in args.data:
            runs: dict[str, list] = {name: [] for name in pythons}
            for name, python in pythons.items():  # once, untimed: compiled loops cached, the file in the page cache
                one_run(python, data, folder)
            for turn in range(args.rounds):
                order = list(pythons.items()) if turn % 2 == 0 else list(pythons.items())[::-1]
                for name, python in order:
                    runs[name].append(one_run(python, data, folder))
            print(f"{data}: medians of {args.rounds} interleaved rounds; load average {os.getloadavg()[0]:.1f} "
                  f"on {os.cpu_count()} cores")
            print(f"  {'phase':22s}" + "".join(f" {name + ' wall':>11s} {name + ' CPU':>10s}" for name in pythons))
            for phase in [*PHASES, "process"]:
                cells = ""
                for name in pythons:
                    wall = statistics.median(run[phase][0] for run in runs[name])
                    cpu = statistics.median(run[phase][1] for run in runs[name])
                    cells += f" {wall:11.2f} {cpu:10.2f}" if phase != "process" else f" {wall:11.2f} {'':>10s}"
                print(f"  {phase:22s}{cells}")


if __name__ == "__main__":
    main()
