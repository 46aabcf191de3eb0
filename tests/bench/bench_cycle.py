"""A planning cycle at scale: what ``fit --ledger`` adds to the fit, and how long ``ledger carry`` takes.

    .venv/bin/python tests/bench/bench_cycle.py [--series 100000] [--rows 70] [--repeat 2] [--keep FOLDER]

Invented weekly series (seeded; ``invented.py``): cycle 1 has ``--rows`` weeks a series, cycle 2 one
week more.  Cycle 1 is fitted and every series with a chosen curve accepted with its signed snapshot
(a ledger of one record a series).  Then, interleaved and repeated, the whole ``pricefold fit`` process
on cycle 2 without and with ``--ledger`` (wall time and the child's CPU time), and ``pricefold ledger
carry`` on a fresh copy of the ledger each time.  Prints the figures and their ratios from this one
run; the machine is shared, so compare the ratios, not the seconds.
"""
from __future__ import annotations

import argparse
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from tests.bench.invented import invented_arrays  # noqa: E402

PRICEFOLD = [sys.executable, "-m", "pricefold"]


def write_data(folder: Path, n_series: int, rows: int) -> tuple[Path, Path]:
    import pyarrow as pa
    import pyarrow.csv as pc
    product, price, volume = invented_arrays(n_series, rows + 1, seed=3)
    week = np.tile(np.arange(rows + 1), n_series)
    dates = (np.datetime64("2025-01-06") + week * np.timedelta64(7, "D")).astype("datetime64[D]")
    names = np.char.add("item-", product.astype(str))
    import pyarrow.compute as pac
    plan = pa.table({"product": names, "price": price}).group_by("product").aggregate([("price", "approximate_median")])
    pc.write_csv(pa.table({"product": plan.column("product"),
                           "plan_price": pac.round(plan.column("price_approximate_median"), 2)}), folder / "plan.csv")
    paths = []
    for label, keep in (("cycle1", week < rows), ("cycle2", np.ones(len(week), bool))):
        table = pa.table({"product": names[keep], "week": dates[keep], "price": price[keep], "volume": volume[keep]})
        path = folder / f"{label}.csv"
        pc.write_csv(table, path)
        paths.append(path)
    return paths[0], paths[1]


def sign_everything(results_path: Path, ledger_path: Path) -> int:
    """Accept every series' proposal with its signed snapshot: one record a series, one append."""
    from fitcore import ledger
    from fitcore.ledger.snapshot import from_records
    from fitcore.results.read import read_results
    header, records = read_results(results_path)
    records = [r for r in records if r["chosen"]]
    signed = from_records([(r, r["chosen"]) for r in records], 0.95)
    entries = [ledger.Entry(series=r["key"], action="accept", fingerprint=r["fingerprint"],
                            results=ledger.results_digest(header), model=r["chosen"], proposed=r["chosen"],
                            flags=[f["code"] for f in r["flags"]], note="bench" if r["flags"] else "", signed=s)
               for r, s in zip(records, signed)]
    ledger.append(ledger_path, entries, ledger.Identity("ana", "ana", "bench"))
    return len(entries)


def run(args: list[str]) -> tuple[float, float]:
    """(wall, CPU) seconds of one pricefold process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    started = time.perf_counter()
    done = subprocess.run(PRICEFOLD + args, capture_output=True, text=True)
    wall = time.perf_counter() - started
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if done.returncode:
        raise SystemExit(f"pricefold {' '.join(args)} failed: {done.stderr.strip()}")
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--series", type=int, default=100_000)
    parser.add_argument("--rows", type=int, default=70)
    parser.add_argument("--repeat", type=int, default=2)
    parser.add_argument("--keep", type=Path, default=None, metavar="FOLDER",
                        help="make the data and the signed ledger in FOLDER once and reuse them in later runs")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as name:
        folder = args.keep or Path(name)
        folder.mkdir(parents=True, exist_ok=True)
        started = time.perf_counter()
        ledger_path = folder / "ledger.jsonl"
        first, second = folder / "cycle1.csv", folder / "cycle2.csv"
        common = ["--date", "week", "--plan", str(folder / "plan.csv"), "--quiet"]
        if args.keep is None or not ledger_path.exists():
            first, second = write_data(folder, args.series, args.rows)
            run(["fit", str(first), "-o", str(folder / "r1.parquet"), *common])
            sign_everything(folder / "r1.parquet", ledger_path)
        with ledger_path.open("rb") as lines:
            signed = sum(1 for _ in lines)
        print(f"{args.series:,} series × {args.rows} weeks (+1 in cycle 2); ledger of {signed:,} signed records, "
              f"{ledger_path.stat().st_size / 2**20:.0f} MiB; set up in {time.perf_counter() - started:.0f} s")
        plain, with_ledger, carries = [], [], []
        for _ in range(args.repeat):
            plain.append(run(["fit", str(second), "-o", str(folder / "r2.parquet"), *common]))
            with_ledger.append(run(["fit", str(second), "-o", str(folder / "r2l.parquet"), *common,
                                    "--ledger", str(ledger_path)]))
            copy = folder / "carry.jsonl"
            shutil.copyfile(ledger_path, copy)
            carry_fit = folder / "r2c.parquet"
            shutil.copyfile(folder / "r2l.parquet", carry_fit)
            # the results name the ledger they were backtested against: fit them against the copy
            run(["fit", str(second), "-o", str(carry_fit), *common, "--ledger", str(copy)])
            carries.append(run(["ledger", "carry", str(carry_fit), "--ledger", str(copy), "--quiet"]))
            carried = sum(1 for line in copy.open("rb") if b'"action":"carry"' in line)
        best = lambda runs, i: min(r[i] for r in runs)  # noqa: E731
        for label, i in (("wall", 0), ("CPU", 1)):
            a, b = best(plain, i), best(with_ledger, i)
            print(f"fit, whole process ({label}, best of {args.repeat}): {a:.2f} s; with --ledger {b:.2f} s "
                  f"(+{(b / a - 1) * 100:.0f}%; budget +20%)")
        print(f"ledger carry, whole process: best {best(carries, 0):.2f} s wall, {best(carries, 1):.2f} s CPU "
              f"({carried:,} series carried; budget 5 s)")
        print(f"load average now: {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
