"""Benchmark of ``fit --engine dask`` on 200k invented series (≈ 14M rows, a Parquet folder).

    python tests/bench/bench_scale.py [--series 200000] [--workers 2]

Prints, measured in one run: wall time and peak memory of ``pricefold fit`` with the
local engine and with Dask on a local cluster of ``--workers`` processes (peak
memory per process: the command and each worker); an extrapolation to 10⁷
series on 20 workers from the measured per-series cost and per-partition
overhead; and triage of the Dask results folder (launch to first screen,
key-to-repaint).  Not a test: machines are shared and noisy.
"""
from __future__ import annotations

import argparse
import asyncio
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from fitcore.scale.dask_engine import connect, disconnect  # noqa: E402
from tests.bench.bench_triage import measure_triage  # noqa: E402
from tests.bench.invented import invented_arrays  # noqa: E402


def high_water(pid: int | str = "self") -> float:
    """Peak resident memory (MiB) of a process so far: VmHWM, which starts afresh at exec
    (``ru_maxrss`` would carry this script's own peak into every child it starts)."""
    try:
        with open(f"/proc/{pid}/status") as handle:
            for line in handle:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024
    except OSError:
        pass
    return float("nan")


def run(command: list[str]) -> tuple[float, float]:
    """Wall seconds and peak resident memory (MiB) of one command (polled every 20 ms)."""
    start = time.perf_counter()
    child = subprocess.Popen(command)
    peak = 0.0
    while child.poll() is None:
        seen = high_water(child.pid)
        peak = max(peak, seen) if seen == seen else peak
        time.sleep(0.02)
    if child.returncode:
        raise SystemExit(f"failed: {' '.join(command)}")
    return time.perf_counter() - start, peak


def worker_peak() -> float:
    return high_water()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--series", type=int, default=200_000)
    parser.add_argument("--workers", type=int, default=2)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as name:
        folder = Path(name)
        data = folder / "data"
        data.mkdir()
        product, price, volume = invented_arrays(args.series)
        names = np.char.add("item-", product.astype(str))
        for i, rows in enumerate(np.array_split(np.arange(len(price)), 8)):
            pq.write_table(pa.table({"product": names[rows], "price": price[rows], "volume": volume[rows]}),
                           data / f"part{i}.parquet", row_group_size=500_000)
        print(f"{args.series:,} invented series, {len(price):,} rows in 8 Parquet files")
        fit = [sys.executable, "-m", "pricefold", "fit", str(data), "--quiet"]
        t_local, m_local = run(fit + ["-o", str(folder / "local.parquet")])
        print(f"  local engine:  {t_local:6.1f} s wall, peak {m_local:,.0f} MiB (one process)")
        start = time.perf_counter()
        client = connect(None, args.workers)
        t_cluster = time.perf_counter() - start
        out = folder / "dask.parquet"
        t_dask, m_client = run(fit + ["-o", str(out), "--engine", "dask", "--scheduler", client.scheduler.address])
        peaks = sorted(client.run(worker_peak).values())
        disconnect(client)
        summary = json.loads((out / "_summary.json").read_text())
        print(f"  Dask, {args.workers} workers: {t_dask:6.1f} s wall (+ {t_cluster:.1f} s to start the cluster), "
              f"command peak {m_client:,.0f} MiB, worker peaks {', '.join(f'{m:,.0f}' for m in peaks)} MiB, "
              f"{summary['partitions']} partitions, {summary['pieces']} pieces")
        # Extrapolation: per-series work parallelises; per-partition and per-piece overheads add up.
        per_series = t_dask * args.workers / args.series
        series, workers = 10 ** 7, 20
        print(f"  measured cost: {per_series * 1e6:.0f} µs of worker time a series "
              f"(local engine: {t_local / args.series * 1e6:.0f} µs a series, one process)")
        estimate = series * per_series / workers
        rows_per_worker = len(price) / args.workers
        print(f"  extrapolated: 10⁷ series ({series * 70 / 1e9:.1f}·10⁹ rows) on {workers} workers ≈ "
              f"{estimate / 60:.0f} min of worker time each, if the input is split into ≥ {workers * 4} Parquet "
              f"row groups; memory ≈ {max(peaks) * 2 ** 20 / rows_per_worker:.0f} bytes a row a worker holds "
              f"(measured), so ≈ {max(peaks) * 2 ** 20 / rows_per_worker * series * 70 / workers / 2 ** 30:.0f} GiB "
              f"a worker at 20 workers, unless rows are fitted in more partitions than workers hold at once")
        asyncio.run(measure_triage(out, folder))


if __name__ == "__main__":
    main()
