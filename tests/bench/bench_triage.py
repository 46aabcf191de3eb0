"""Benchmark of the triage screen on 100k invented series: start-up and key-to-repaint.

    python tests/bench/bench_triage.py [--series 100000]

Prints, measured in one run: the time to fit and diagnose (the worker's part),
to build the session, and from session ready to the first usable screen; and
the median and 95th-percentile key-to-repaint over 200 cursor moves and 50
decisions, driven through Textual's Pilot.  Not a test: machines are noisy.
"""
from __future__ import annotations

import argparse
import asyncio
import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

import fitcore  # noqa: E402
from fitcore.diagnostics import diagnose  # noqa: E402
from fitcore.ledger import Identity  # noqa: E402
from tests.bench.invented import invented_dataset  # noqa: E402
from tui.app import TriageApp  # noqa: E402
from tui.session import TriageSession  # noqa: E402


def p95(values):
    return sorted(values)[int(0.95 * (len(values) - 1))]


class RepaintClock:
    """Times from a key press to the next screen update the app produces."""

    def __init__(self, app) -> None:
        self.stamps: list[float] = []
        original = app._display

        def display(screen, renderable):
            if renderable is not None:
                self.stamps.append(time.perf_counter())
            original(screen, renderable)
        app._display = display

    async def press(self, pilot, key: str) -> float:
        seen = len(self.stamps)
        start = time.perf_counter()
        await pilot.press(key)
        while len(self.stamps) == seen:
            await asyncio.sleep(0.0005)
        return self.stamps[seen] - start


async def measure(n_series: int) -> None:
    data = invented_dataset(n_series)
    start = time.perf_counter()
    results = fitcore.fit_batch(data, plan_price=None)
    diagnosis = diagnose(results)
    fitted = time.perf_counter() - start
    with tempfile.TemporaryDirectory() as folder:
        start = time.perf_counter()
        session = TriageSession(results, diagnosis, Path(folder) / "ledger.jsonl", Identity("bench", "bench", "h"), "r")
        built = time.perf_counter() - start
        app = TriageApp(lambda progress: session)
        start = time.perf_counter()
        async with app.run_test(size=(160, 50)) as pilot:
            await app.workers.wait_for_complete()
            while not app.screen.__class__.__name__ == "TriageScreen":
                await pilot.pause(0.01)
            await pilot.pause()
            first = time.perf_counter() - start
            clock = RepaintClock(app)
            moves, decisions = [], []
            for i in range(200):
                moves.append(await clock.press(pilot, "down" if i % 4 else "pagedown"))
                await asyncio.sleep(0.03)  # a fast typist; the charts catch up when the cursor rests
            for _ in range(50):
                decisions.append(await clock.press(pilot, "a"))
                await asyncio.sleep(0.03)
    print(f"{n_series:,} series ({data.n_rows:,} rows):")
    print(f"  fit + diagnose (worker): {fitted:.2f} s; session build: {built:.2f} s; "
          f"app start to first usable screen: {first:.2f} s")
    print(f"  key-to-repaint, 200 cursor moves: median {statistics.median(moves) * 1e3:.0f} ms, "
          f"p95 {p95(moves) * 1e3:.0f} ms")
    print(f"  key-to-repaint, 50 decisions (ledger append + fsync): median "
          f"{statistics.median(decisions) * 1e3:.0f} ms, p95 {p95(decisions) * 1e3:.0f} ms")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--series", type=int, default=100_000)
    asyncio.run(measure(parser.parse_args().series))


if __name__ == "__main__":
    main()
