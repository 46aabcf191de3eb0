"""Benchmark of ``pricefold ledger export`` on 100k invented series, with and without overrides.

    python tests/bench/bench_export.py FOLDER [--series 100000] [--overrides 5] [--runs 3] [--python PY ...]

Builds once in FOLDER (kept for later runs): invented data (Parquet), its Parquet results (``pricefold fit``
with a plan file: each series' median price) and two ledgers — every unflagged series accepted
(``accept-unflagged``), and the same with ``--overrides`` flagged series then overridden to another available
candidate.  Then times the export of the results against each ledger, ``--runs`` rounds, each round every
``--python`` in turn (interleaved: e.g. main's venv and this one's), as CPU time (user + system of the process
and its threads) and wall time, with the load average beside each run.  Run it from outside a checkout: each
``python -m pricefold`` would import the checkout in its working folder.  Not a test: machines are noisy.
"""
from __future__ import annotations

import argparse
import os
import resource
import shutil
import subprocess
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.bench.invented import invented_arrays  # noqa: E402


def build(folder: Path, n_series: int, overrides: int) -> dict[str, Path]:
    import numpy as np
    import pyarrow as pa
    import pyarrow.parquet as pq

    from fitcore import ledger
    from fitcore.results.read import read_header
    folder.mkdir(parents=True, exist_ok=True)
    data, plan, results = folder / "bench.parquet", folder / "plan.csv", folder / "results.parquet"
    accepted, overridden = folder / "accepted.jsonl", folder / f"overridden{overrides}.jsonl"
    if not results.exists():
        product, price, volume = invented_arrays(n_series)
        names = np.char.add("item-", product.astype(str))
        pq.write_table(pa.table({"product": names, "price": price, "volume": volume}), data)
        # a plan price inside each series' prices (its median), so most rows are not extrapolations
        order = np.lexsort((price, product))
        middle = price[order].reshape(n_series, -1)[:, price.size // n_series // 2]
        plan.write_text("product,plan_price\n" + "".join(f"item-{i},{p}\n" for i, p in enumerate(middle)))
        subprocess.run([sys.executable, "-m", "pricefold", "fit", str(data), "--plan", str(plan), "-o", str(results),
                        "--quiet"], check=True)
    if not accepted.exists():
        subprocess.run([sys.executable, "-m", "pricefold", "ledger", "accept-unflagged", str(results), "--ledger",
                        str(accepted), "--analyst", "bench", "--quiet"], check=True)
    if not overridden.exists():
        shutil.copyfile(accepted, overridden)
        table = pq.read_table(results, columns=["product", "candidate", "available", "is_chosen", "fingerprint",
                                                "flags"])
        rows = table.to_pylist()
        n_c = len(rows) // n_series
        digest = ledger.results_digest({k: v for k, v in read_header(results).items() if k != "key_columns"})
        entries = []
        flagged = [s for s in range(n_series) if rows[s * n_c]["flags"] != "[]"]  # not accepted: still pending
        for s in flagged[::max(len(flagged) // max(overrides, 1), 1)][:overrides]:
            cands = rows[s * n_c:(s + 1) * n_c]
            chosen = next(r["candidate"] for r in cands if r["is_chosen"])
            other = next(r["candidate"] for r in cands if r["available"] and r["candidate"] != chosen)
            entries.append(ledger.Entry(series={"product": cands[0]["product"]}, action="override",
                                        fingerprint=cands[0]["fingerprint"], results=digest, model=other,
                                        proposed=chosen, note="bench override"))
        ledger.append(overridden, entries, ledger.Identity("bench", "bench", "h"))
    return {"results": results, "none": accepted, "some": overridden}


def timed(python: str, ledger_path: Path, results: Path, out: Path) -> tuple[float, float, float]:
    """(CPU seconds, wall seconds, load average) of one export run in a child process."""
    if out.exists():
        out.unlink()
    load = os.getloadavg()[0]
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    subprocess.run([python, "-m", "pricefold", "ledger", "export", str(ledger_path), "--results", str(results),
                    "-o", str(out), "--quiet"], check=True)
    wall = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return after.ru_utime - before.ru_utime + after.ru_stime - before.ru_stime, wall, load


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("folder", type=Path)
    parser.add_argument("--series", type=int, default=100_000)
    parser.add_argument("--overrides", type=int, default=5)
    parser.add_argument("--runs", type=int, default=3)
    parser.add_argument("--python", action="append", default=None)
    args = parser.parse_args()
    files = build(args.folder, args.series, args.overrides)
    pythons = args.python or [sys.executable]
    times: dict[tuple[str, str], list] = {}
    for _ in range(args.runs):
        for which in ("none", "some"):
            for python in pythons:
                got = timed(python, files[which], files["results"], args.folder / "out.csv")
                times.setdefault((python, which), []).append(got)
                print(f"{python} {which:>4} overrides: CPU {got[0]:.2f} s, wall {got[1]:.2f} s, load {got[2]:.2f}",
                      flush=True)
    for (python, which), got in times.items():
        cpu = sorted(g[0] for g in got)
        print(f"{python} {which:>4}: median CPU {cpu[len(cpu) // 2]:.2f} s (min {cpu[0]:.2f}), "
              f"loads {min(g[2] for g in got):.2f}–{max(g[2] for g in got):.2f}")
    if len(pythons) == 2:
        for which in ("none", "some"):
            a, b = (sorted(g[0] for g in times[(p, which)]) for p in pythons)
            print(f"{which:>4} overrides: CPU median ratio second/first {b[len(b) // 2] / a[len(a) // 2]:.2f}")


if __name__ == "__main__":
    main()
