"""Benchmark of the respelling rule (``fitcore.ledger.respelling.respellings``) and of the count of the ledger's signed
series missing from the results (``fitcore.ledger.missing.missing_from``) at ledger and results sizes of 100k.

    python tests/bench/bench_respelling.py [--series 100000] [--rounds 5]

Invented keys (product, region): the ledger holds ``--series`` series; the results hold the same series with
none, 1% or all of them respelled (the region lower-cased, or with a trailing space), and 1% new products.  For each
case it prints the CPU time of ``respellings`` (median of ``--rounds``, the cases interleaved round by round) beside
that of one look-up of every results' series in the ledger's histories by series id (what ``export`` and
``accept-unflagged`` do for each series anyway), and their ratio, then the same of ``missing_from`` (every ledger
series signed) and of that count told which of them the results hold under another spelling (``Missing.beside``
matching every results' series loosely, decided or new: the note's clause and example), with the load average.
Not a test: machines are noisy.
"""
from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from fitcore.ledger.missing import missing_from  # noqa: E402
from fitcore.ledger.replay import series_id  # noqa: E402
from fitcore.ledger.respelling import respellings  # noqa: E402

REGIONS = ("North", "East", "South")


def keys(n: int, respelled: float) -> tuple[list[dict], list[dict]]:
    """(ledger keys, results keys): ``respelled`` of the results' series spelled otherwise, 1% new products."""
    ledger = [{"product": f"item {i // 3:06d}", "region": REGIONS[i % 3]} for i in range(n)]
    every = int(1 / respelled) if respelled else 0
    results = []
    for i, key in enumerate(ledger):
        if every and i % every == 0:
            key = {**key, "region": key["region"].lower() if i % 2 else key["region"] + " "}
        results.append(key)
    results += [{"product": f"new {i:06d}", "region": "North"} for i in range(n // 100)]
    return ledger, results


def cpu(call) -> float:
    start = time.process_time()
    call()
    return time.process_time() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--series", type=int, default=100_000)
    parser.add_argument("--rounds", type=int, default=5)
    args = parser.parse_args()
    cases = {name: keys(args.series, share) for name, share in (("none respelled", 0.0), ("1% respelled", 0.01),
                                                                   ("all respelled", 1.0))}
    ids = {name: {series_id(key) for key in ledger} for name, (ledger, _) in cases.items()}
    histories = {name: {series_id(key): Signed(key) for key in ledger} for name, (ledger, _) in cases.items()}
    times: dict[str, list[tuple[float, float, float, float]]] = {name: [] for name in cases}
    for _ in range(args.rounds):
        for name, (ledger, results) in cases.items():
            times[name].append((cpu(lambda: respellings(results, ledger)),
                                cpu(lambda: [series_id(key) in ids[name] for key in results]),
                                cpu(lambda: missing_from(results, histories[name])),
                                cpu(lambda: missing_from(results, histories[name]).beside(results))))
    load = open("/proc/loadavg").read().split()[0] if Path("/proc/loadavg").exists() else "?"
    print(f"{args.series:,} ledger series, {args.series * 101 // 100:,} results' series; CPU, median of "
          f"{args.rounds} (load {load}):")
    for name, (ledger, results) in cases.items():
        rule, before, gone, marked = (statistics.median(column) for column in zip(*times[name]))
        found, missing = respellings(results, ledger), missing_from(results, histories[name])
        print(f"  {name:<15} respellings {rule * 1e3:6.1f} ms ({len(found):,} found, {found.new:,} new); "
              f"look-ups {before * 1e3:6.1f} ms; ratio {rule / max(before, 1e-9):.2f}; missing_from "
              f"{gone * 1e3:6.1f} ms ({len(missing):,} missing), ratio {gone / max(before, 1e-9):.2f}; "
              f"with beside {marked * 1e3:6.1f} ms")


class Signed:
    """A ledger series' replayed history as ``missing_from`` reads it: an accept standing."""

    def __init__(self, key: dict) -> None:
        self.current = self.latest = {"series": key, "action": "accept"}


if __name__ == "__main__":
    main()
