"""``ledger accept-unflagged`` on a large results file: two installs side by side, and their ledgers compared.

    .venv/bin/python tests/bench/bench_accept.py RESULTS --before OTHER/.venv/bin/pricefold [--runs 3]

Each round runs the other install's ``pricefold`` and this one's (interleaved) on RESULTS into a new ledger,
and prints each run's wall time, CPU time (user + system) and peak memory (the child's maximum resident
set, from ``wait4``) with the load average, then the ratios of the medians.  Then it checks that the two
ledgers agree: each verifies with the other install's ``ledger verify``, and their records are equal field
by field except the time, the batch id and the chain (``at``, ``batch.id``, ``digest``, ``prev``: they
differ between any two runs).  Not a test: machines are noisy.
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
from pathlib import Path

THIS = str(Path(sys.executable).with_name("pricefold"))
VARYING = ("at", "digest", "prev")


def run(pricefold: str, results: Path, ledger: Path) -> tuple[float, float, float]:
    """(wall s, CPU s, peak MiB) of one ``accept-unflagged`` into a new ledger."""
    start = time.perf_counter()
    child = subprocess.Popen([pricefold, "ledger", "accept-unflagged", str(results), "--ledger", str(ledger), "-q"])
    _, status, usage = os.wait4(child.pid, 0)
    child.returncode = os.waitstatus_to_exitcode(status)
    wall = time.perf_counter() - start
    if child.returncode:
        raise SystemExit(f"{pricefold}: exit {child.returncode}")
    return wall, usage.ru_utime + usage.ru_stime, usage.ru_maxrss / 1024


def comparable(line: bytes) -> dict:
    record = json.loads(line)
    for name in VARYING:
        record.pop(name)
    if record.get("batch"):
        record["batch"] = {k: v for k, v in record["batch"].items() if k != "id"}
    return record


def same_records(a: Path, b: Path) -> str:
    with open(a, "rb") as one, open(b, "rb") as other:
        count = 0
        for count, (x, y) in enumerate(zip(one, other), start=1):
            if comparable(x) != comparable(y):
                return f"record {count} differs"
        if one.readline() or other.readline():
            return "not as many records"
    return f"all {count:,} records equal but for {', '.join(VARYING)} and the batch id"


def verified_by(pricefold: str, ledger: Path) -> str:
    done = subprocess.run([pricefold, "ledger", "verify", str(ledger)], capture_output=True, text=True)
    return done.stdout.splitlines()[0] if done.returncode == 0 else f"REFUSED: {done.stdout.strip()}"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("results", type=Path)
    parser.add_argument("--before", required=True, help="the other install's pricefold (e.g. main's venv)")
    parser.add_argument("--runs", type=int, default=3)
    args = parser.parse_args()
    figures: dict[str, list] = {"before": [], "this": []}
    with tempfile.TemporaryDirectory() as folder:
        for round_ in range(args.runs):
            for name, pricefold in (("before", args.before), ("this", THIS)):
                ledger = Path(folder) / f"{name}-{round_}.jsonl"
                wall, cpu, peak = run(pricefold, args.results, ledger)
                figures[name].append((wall, cpu, peak))
                load = open("/proc/loadavg").read().split()[0]
                print(f"  {name:6} {wall:6.2f} s wall, {cpu:6.2f} s CPU, peak {peak:6,.0f} MiB (load {load})", flush=True)
        median = {name: [statistics.median(f[i] for f in runs) for i in range(3)] for name, runs in figures.items()}
        (bw, bc, bp), (tw, tc, tp) = median["before"], median["this"]
        print(f"medians: before {bw:.2f} s wall, {bc:.2f} s CPU, {bp:,.0f} MiB; this {tw:.2f} s, {tc:.2f} s, "
              f"{tp:,.0f} MiB; ratios {bw / tw:.1f}× wall, {bc / tc:.1f}× CPU, {bp / tp:.1f}× peak")
        before, this = Path(folder) / "before-0.jsonl", Path(folder) / "this-0.jsonl"
        print(f"this install's ledger, verified by the other: {verified_by(args.before, this)}")
        print(f"the other's ledger, verified by this install: {verified_by(THIS, before)}")
        print(f"records: {same_records(before, this)}")


if __name__ == "__main__":
    main()
