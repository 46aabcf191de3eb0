"""The ledger at 100,000 records: open and verify, a refresh with one new record, one decision.

    .venv/bin/python tests/bench/bench_ledger.py [--records 100000] [--signed] [--key]

Builds an invented ledger (bulk accepts of 300 series each, as ``accept-unflagged`` writes them;
``--signed`` gives every accept a signed-model snapshot of a degree-2 curve), then prints, from
one run: the time to open it (read + verify every record + replay), a JSON-only pass over the same
lines as a floor, a refresh that finds one new record (appended by another process's reader),
and the latency of one decision through an open reader (lock, tail, rules, write, fsync), with
its median and p95 over repeated decisions, and decisions 1.2 s apart with a look between (an open
reader reads its verified records again before an append only when the file changed within a second
of its last look).  Timings on a shared machine are noisy: compare the
ratios printed side by side.
"""
from __future__ import annotations

import argparse
import gc
import json
import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from fitcore import ledger  # noqa: E402
from fitcore.ledger.replay import replay  # noqa: E402

SIGNED = {"candidate": "poly2", "family": "poly", "coef": [1089.1564790789, -290.9405091594, 22.1621508588],
          "smearing": None, "basis": {"x": "price", "mid": 2.17, "half": 0.56,
                                      "coef": [501.2230491233, -118.2390012387, 6.9490271123]},
          "cov_unscaled": [[0.0312, -0.0011, -0.0301], [-0.0011, 0.0417, 0.0019], [-0.0301, 0.0019, 0.0694]],
          "sigma2": 97.2212, "df": 101, "level": 0.95, "n": 104, "price_range": [1.61, 2.73],
          "last_date": "2026-11-03", "plan": {"price": 2.2, "volume": 1040.96, "lo": 876.81, "hi": 1205.11,
                                              "elasticity": -1.331}, "cv_mse": 6844.41, "controls": None}


def build(path: Path, records: int, signed: bool, key: bytes | None) -> None:
    book = ledger.Ledger(path, key)
    who = ledger.Identity("ana", "ana", "server-1")
    for start in range(0, records, 300):
        book.append([ledger.Entry(series={"product": f"item {i:06d}", "region": "North"}, action="accept",
                                  fingerprint=f"{i:064x}", results="ab" * 32, model="poly2", proposed="poly2",
                                  signed=SIGNED if signed else None)
                     for i in range(start, min(start + 300, records))], who)


def timed(action, repeat: int = 1) -> list[float]:
    out = []
    for _ in range(repeat):
        started = time.perf_counter()
        action()
        out.append(time.perf_counter() - started)
    return out


def unverified(path: Path) -> None:
    """What the screen did before every reader verified: parse each line, replay, check nothing."""
    records, _ = ledger.parse(path.read_bytes())
    replay(records)


def floor(path: Path) -> None:
    """Only parse every line as JSON, the collector paused: no reader can do less."""
    paused = gc.isenabled()
    gc.disable()
    [json.loads(line) for line in path.read_bytes().splitlines()]
    if paused:
        gc.enable()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--records", type=int, default=100_000)
    parser.add_argument("--signed", action="store_true", help="every accept carries a signed-model snapshot")
    parser.add_argument("--key", action="store_true", help="HMAC-SHA-256 digests (PRICEFOLD_LEDGER_KEY set)")
    args = parser.parse_args()
    key = b"bench key" if args.key else None
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "ledger.jsonl"
        started = time.perf_counter()
        build(path, args.records, args.signed, key)
        size = path.stat().st_size
        print(f"ledger: {args.records:,} records, {size / 2**20:.1f} MiB "
              f"({'signed snapshots, ' if args.signed else ''}{'keyed' if key else 'plain'}), "
              f"built in {time.perf_counter() - started:.1f} s")
        opens = timed(lambda: ledger.Ledger(path, key), 3)
        before = timed(lambda: unverified(path), 3)
        floors = timed(lambda: floor(path), 3)
        print(f"open + verify + replay: best {min(opens):.2f} s of 3; the unverified parse + replay the "
              f"screen did before: {min(before):.2f} s (ratio {min(opens) / min(before):.2f}); a bare JSON parse "
              f"per line: {min(floors):.2f} s (ratio {min(opens) / min(floors):.2f})")
        book, other = ledger.Ledger(path, key), ledger.Ledger(path, key)
        who = ledger.Identity("bo", "bo", "server-2")
        refreshes, decisions = [], []
        for i in range(40):
            product = {"product": f"item {i:06d}", "region": "North"}
            history = other.histories[json.dumps(product, sort_keys=True, separators=(",", ":"))]
            entry = ledger.Entry(series=product, action="hold", fingerprint=f"{i:064x}", results="ab" * 32,
                                 note="ask the buyer", supersedes=history.latest["digest"])
            decisions += timed(lambda: other.append([entry], who))
            refreshes += timed(lambda: book.refresh(wait=False))
        assert book.head == other.head and book.state == "intact"
        print(f"refresh finding one new record: median {statistics.median(refreshes) * 1000:.1f} ms, "
              f"p95 {sorted(refreshes)[37] * 1000:.1f} ms (40 refreshes)")
        print(f"one decision through an open reader (lock, tail, rules, write, fsync): median "
              f"{statistics.median(decisions) * 1000:.1f} ms, p95 {sorted(decisions)[37] * 1000:.1f} ms "
              f"(40 decisions; budget 50 ms)")
        idle = timed(lambda: book.refresh(wait=False), 200)
        print(f"refresh finding nothing new (a screen's 2 s poll): median {statistics.median(idle) * 1e6:.0f} µs")
        spaced, looks = [], []
        for i in range(8):  # an analyst reading the evidence: the file still for over a second, a look between
            time.sleep(1.2)
            looks += timed(lambda: book.refresh(wait=False))
            product = {"product": f"item {40 + i:06d}", "region": "North"}
            history = book.histories[json.dumps(product, sort_keys=True, separators=(",", ":"))]
            entry = ledger.Entry(series=product, action="hold", fingerprint=f"{i:064x}", results="ab" * 32,
                                 note="ask the buyer", supersedes=history.latest["digest"])
            spaced += timed(lambda: book.append([entry], who))
        print(f"decisions 1.2 s apart, a look before each (the look reads the verified records again once the "
              f"file is still): decision median {statistics.median(spaced) * 1000:.1f} ms, max "
              f"{max(spaced) * 1000:.1f} ms; look median {statistics.median(looks) * 1000:.1f} ms")


if __name__ == "__main__":
    main()
