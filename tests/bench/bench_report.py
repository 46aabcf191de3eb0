"""Benchmark of ``pricefold report`` on invented series: the page's size and the command's time.

    python tests/bench/bench_report.py [--series 100000] [--overrides 100] [--holds 50] [--notes 50]

Writes invented data (Parquet, a plan price per series, one in twenty outside the observed
prices), fits it (``pricefold fit``), records a bulk accept of every unflagged series and a number
of one-by-one overrides, holds, notes and accepts past a stop flag, then times the whole
``pricefold report`` process (data refitted for the charts included) and prints the page's size,
its sections and charts, the CPU time of its processes (less sensitive than the wall time to
what else the machine runs) and the peak memory.  Not a test: machines are noisy.
"""
from __future__ import annotations

import argparse
import os
import re
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

import numpy as np  # noqa: E402

from fitcore import ledger  # noqa: E402
from fitcore.results.read import read_header  # noqa: E402
from fitcore.results.stored import stored_results  # noqa: E402
from tests.bench.invented import invented_arrays  # noqa: E402


def write_inputs(n_series: int, folder: Path) -> tuple[Path, Path]:
    import pyarrow as pa
    import pyarrow.parquet as pq
    product, price, volume = invented_arrays(n_series)
    names = np.char.add("item-", product.astype(str))
    data = folder / "bench.parquet"
    pq.write_table(pa.table({"product": names, "price": price, "volume": volume}), data)
    first = np.flatnonzero(np.r_[True, product[1:] != product[:-1]])
    plan_price = np.round(np.maximum.reduceat(price, first) * np.where(np.arange(n_series) % 20 == 0, 1.3, 0.9), 2)
    plan = folder / "plan.csv"
    with plan.open("w") as handle:
        handle.write("product,plan_price\n")
        handle.writelines(f"item-{i},{p:.2f}\n" for i, p in enumerate(plan_price))
    results = folder / "results.parquet"
    subprocess.run([sys.executable, "-m", "pricefold", "fit", str(data), "--plan", str(plan), "-o", str(results),
                    "--quiet"], check=True)
    return data, results


def decide(results_path: Path, ledger_path: Path, overrides: int, holds: int, notes: int, past_stop: int) -> int:
    results, diagnosis = stored_results(results_path)
    digest = ledger.results_digest({k: v for k, v in read_header(results_path).items() if k != "key_columns"})
    who = ledger.Identity("bench", "bench", "bench-host")
    flagged = diagnosis.raised.any(axis=1)
    stop = diagnosis.n_stop() > 0

    def entry(s, action, model=None, note=""):
        chosen = results.names[results.chosen[s]] if results.chosen[s] >= 0 else None
        return ledger.Entry(series=results.data.key_of(s), action=action, fingerprint=results.data.fingerprint_of(s),
                            results=digest, model=model or chosen, proposed=chosen, note=note)

    bulk = [entry(s, "accept") for s in np.flatnonzero(~flagged & (results.chosen >= 0)).tolist()]
    rng = np.random.default_rng(1)
    pool = rng.permutation(np.flatnonzero(flagged & (results.chosen >= 0)))
    picks = iter(pool.tolist())
    one_by_one = []
    for _ in range(overrides):
        s = next(picks)
        other = next(c for c in range(len(results.names)) if results.available[s, c] and c != results.chosen[s])
        one_by_one.append(entry(s, "override", results.names[other], "benchmark override"))
    one_by_one += [entry(next(picks), "hold", note="benchmark hold") for _ in range(holds)]
    one_by_one += [entry(next(picks), "note", note="benchmark note") for _ in range(notes)]
    stopped = [s for s in picks if stop[s]][:past_stop]
    one_by_one += [entry(s, "accept", note="benchmark accept past a stop flag") for s in stopped]
    book = ledger.Ledger(ledger_path)
    book.append(bulk, who)
    for item in one_by_one:  # one append each, as from the screen
        book.append([item], who)
    return len(bulk) + len(one_by_one)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--series", type=int, default=100_000)
    parser.add_argument("--overrides", type=int, default=100)
    parser.add_argument("--holds", type=int, default=50)
    parser.add_argument("--notes", type=int, default=50)
    parser.add_argument("--past-stop", type=int, default=300)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="bench-report-") as tmp:
        folder = Path(tmp)
        started = time.perf_counter()
        _, results = write_inputs(args.series, folder)
        ledger_path = folder / "ledger.jsonl"
        records = decide(results, ledger_path, args.overrides, args.holds, args.notes, args.past_stop)
        print(f"inputs: {args.series:,} series fitted, {records:,} ledger records "
              f"({time.perf_counter() - started:.1f} s)")
        output = folder / "report.html"
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        start = time.perf_counter()
        process = subprocess.Popen([sys.executable, "-m", "pricefold", "report", str(results), "--ledger",
                                    str(ledger_path), "-o", str(output)], stderr=subprocess.PIPE, text=True)
        stderr = process.stderr.read()
        _, status, usage = os.wait4(process.pid, 0)  # the report process's own peak memory
        process.returncode = os.waitstatus_to_exitcode(status)
        seconds = time.perf_counter() - start
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        cpu = (after.ru_utime + after.ru_stime) - (before.ru_utime + before.ru_stime)
        if process.returncode:
            sys.exit(stderr)
        page = output.read_text(encoding="utf-8")
        peak = usage.ru_maxrss / 1024
        rows = page.count("<tr data-status=")
        sections = page.count('<article class="exception"')
        more = re.search(r"<strong>([\d,]+) more stop-flagged series", page)
        load = os.getloadavg()[0]
        print(f"pricefold report: {seconds:.1f} s wall (bar 30 s; CPU {cpu:.1f} s in all its processes; load average "
              f"{load:.1f} on {os.cpu_count()} cores), {len(page.encode()) / 1e6:.1f} MB (bar 20 MB); "
              f"{rows:,} table rows, {sections:,} detailed sections with {page.count('<svg '):,} charts, "
              f"{more.group(1) if more else 0} more stop-flagged series left out; peak memory {peak:,.0f} MiB")
        print(stderr.strip())


if __name__ == "__main__":
    main()
