"""Benchmark of the triage screen on 100k invented series: start-up and key-to-repaint.

    python tests/bench/bench_triage.py [--series 100000]
    python tests/bench/bench_triage.py --results RESULTS.parquet [--ledger L.jsonl] [--runs 3] [--python PY ...]

The second form only times launch → list and → observations on an existing results file, ``--runs``
rounds, each round every ``--python`` in turn (interleaved: e.g. main's venv and this one's), with the
CPU time the command had used when the list appeared (its processes, all threads) and the load average
beside each run; ``--ledger``: each launch opens a copy of that ledger (verified in full before the list),
else an empty one.

Writes invented data and its results file (``pricefold fit``), then prints,
measured in one run: from launching ``pricefold triage RESULTS`` in a tmux
terminal to the list on screen (and to the observations, read behind it);
and the median and 95th-percentile key-to-repaint over 200 cursor moves
(every 4th a page down) and 50 decisions, driven through Textual's Pilot —
first alone, then again while a second analyst (another process) appends a
decision to the same ledger every 100 ms, so that the 2 s ledger poll has
something to read.  A decision is a hold (h, then Enter for no reason) or an
accept (a, then a note when the series has a stop flag, Enter); the time is
from the Enter that records it.  Not a test: machines are noisy.
"""
from __future__ import annotations

import argparse
import asyncio
import multiprocessing
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

import numpy as np  # noqa: E402

from fitcore.ledger import Identity  # noqa: E402
from tests.bench.invented import invented_arrays  # noqa: E402
from tui.app import TriageApp  # noqa: E402
from tui.factory import open_stored_session, refit_stored, source_from_results  # noqa: E402


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

    async def press(self, pilot, key: str, timeout: float = 5.0) -> float:
        seen = len(self.stamps)
        start = time.perf_counter()
        await pilot.press(key)
        while len(self.stamps) == seen:
            if time.perf_counter() - start > timeout:
                raise TimeoutError(f"no repaint within {timeout} s of {key!r}")
            await asyncio.sleep(0.0005)
        return self.stamps[seen] - start


def write_inputs(n_series: int, folder: Path) -> tuple[Path, Path]:
    """An invented data file (Parquet) and its results file, written by ``pricefold fit``."""
    import pyarrow as pa
    import pyarrow.parquet as pq
    product, price, volume = invented_arrays(n_series)
    data = folder / "bench.parquet"
    pq.write_table(pa.table({"product": np.char.add("item-", product.astype(str)), "price": price,
                             "volume": volume}), data)
    results = folder / "results.parquet"
    subprocess.run([sys.executable, "-m", "pricefold", "fit", str(data), "-o", str(results), "--quiet"], check=True)
    return data, results


def cpu_seconds(pid: int) -> float:
    """CPU time (user + system, every thread, waited-for children too) of process ``pid`` and its descendants."""
    import os
    tick = os.sysconf("SC_CLK_TCK")
    parents, times = {}, {}
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                fields = (entry / "stat").read_text().rsplit(")", 1)[1].split()
            except OSError:
                continue
            parents[int(entry.name)] = int(fields[1])
            times[int(entry.name)] = sum(int(v) for v in fields[11:15]) / tick  # utime stime cutime cstime
    tree, grew = {pid}, True
    while grew:
        more = {child for child, parent in parents.items() if parent in tree} - tree
        tree, grew = tree | more, bool(more)
    return sum(times.get(p, 0.0) for p in tree)


def launch_to_screen(results: Path, folder: Path, python: str = sys.executable,
                     ledger: Path | None = None) -> tuple[float, float, float, float]:
    """Seconds from starting ``pricefold triage RESULTS`` in a terminal (tmux, 160×50) to the list on
    screen, and to the observations on screen (read and fitted behind it); the CPU seconds the command had
    used when each appeared.  ``ledger``: opened as a copy."""
    if ledger is not None:
        import shutil
        shutil.copyfile(ledger, folder / "launch.jsonl")
    sock = folder / "tmux.sock"
    command = f"{python} -m pricefold triage {results} --ledger {folder / 'launch.jsonl'}"
    tmux = ["tmux", "-S", str(sock), "-f", "/dev/null"]
    start = time.perf_counter()
    # started in ``folder``: ``python -m pricefold`` from a checkout would import that checkout's code, whatever
    # the interpreter (every "main" launch ran this branch's code when started from a worktree)
    subprocess.run(tmux + ["new-session", "-d", "-x", "160", "-y", "50", "-c", str(folder), command], check=True)
    listed = observed = cpu = observed_cpu = None
    pane = int(subprocess.run(tmux + ["list-panes", "-F", "#{pane_pid}"], capture_output=True, text=True).stdout)
    try:
        while time.perf_counter() - start < 120 and observed is None:
            screen = subprocess.run(tmux + ["capture-pane", "-p"], capture_output=True, text=True).stdout
            if listed is None and "listed (" in screen:
                listed = time.perf_counter() - start
                cpu = cpu_seconds(pane)
            if "• observed" in screen:
                observed = time.perf_counter() - start
                observed_cpu = cpu_seconds(pane)
            if listed is not None and "Nothing listed" in screen:
                break  # every series decided: no observations to wait for
            time.sleep(0.02)
    finally:
        subprocess.run(tmux + ["kill-server"], capture_output=True)
    return listed, observed, cpu, observed_cpu


async def measure(n_series: int) -> None:
    with tempfile.TemporaryDirectory() as name:
        folder = Path(name)
        start = time.perf_counter()
        _, results_path = write_inputs(n_series, folder)
        print(f"{n_series:,} series ({n_series * 70:,} rows): pricefold fit (whole process) "
              f"{time.perf_counter() - start:.2f} s")
        await measure_triage(results_path, folder)


async def measure_triage(results_path: Path, folder: Path) -> None:
    """Launch to first screen (tmux), then key-to-repaint (Pilot), on a results file or folder."""
    listed, observed, _, _ = launch_to_screen(results_path, folder)
    print(f"  pricefold triage RESULTS, launch to first usable screen: {listed:.2f} s "
          f"(observations drawn after {observed:.2f} s, read and fitted behind the screen)")
    for other in (False, True):
        await measure_keys(results_path, folder, other)


def other_analyst(ledger_path: Path, entries: list, stop, every: float = 0.1) -> None:
    """A second analyst's screen: one decision every ``every`` seconds until ``stop`` is set."""
    from fitcore import ledger
    bo = Identity("bo", "bo", "elsewhere")
    for entry in entries:
        if stop.wait(every):
            return
        ledger.append(ledger_path, [entry], bo)


async def measure_keys(results_path: Path, folder: Path, other: bool) -> None:
    from fitcore import ledger
    who = Identity("bench", "bench", "h")
    ledger_path = folder / ("ledger-two.jsonl" if other else "ledger.jsonl")
    start = time.perf_counter()
    session = open_stored_session(results_path, ledger_path, who)
    opened = time.perf_counter() - start
    source = source_from_results(results_path, check_data=False)
    app = TriageApp(lambda progress: session,
                    observer=lambda progress, first=None: refit_stored(source, progress, first))
    process = stop = None
    if other:  # bo decides series outside ana's list (none needing attention): each poll has news, none pins
        picks = [int(s) for s in np.flatnonzero(~session.needs_attention())[::-1][:3000]]
        entries = [ledger.Entry(series=session.keys.key_of(s), action="hold",
                                fingerprint=session.results.data.fingerprint_of(s), results=session.results_digest,
                                proposed=session.results.names[session.results.chosen[s]]) for s in picks]
        stop = multiprocessing.get_context("fork").Event()
        process = multiprocessing.get_context("fork").Process(target=other_analyst, args=(ledger_path, entries, stop))
    async with app.run_test(size=(160, 50)) as pilot:
        while not app.screen.__class__.__name__ == "TriageScreen":
            await pilot.pause(0.01)
        await app.workers.wait_for_complete()  # the observations are in
        await pilot.pause()
        if process is not None:
            process.start()
        clock = RepaintClock(app)
        moves, pages, decisions = [], [], []
        for i in range(200):
            (moves if i % 4 else pages).append(await clock.press(pilot, "down" if i % 4 else "pagedown"))
            await asyncio.sleep(0.03)  # a fast typist; the charts catch up when the cursor rests
        for i in range(50):
            shown = session.shown
            if i % 2 == 0 and not session.needs_reason(shown, "accept"):
                decisions.append(await clock.press(pilot, "a"))  # the key records at once
            else:
                await pilot.press("h" if i % 2 else "a")
                if i % 2 == 0:
                    await pilot.press(*"seen")  # past a stop flag: a note first
                await pilot.pause()
                decisions.append(await clock.press(pilot, "enter"))
            await asyncio.sleep(0.03)
        seen_other = sum(1 for h in session.histories.values() for r in h.records if r["analyst"] == "bo")
    if process is not None:
        stop.set()
        process.join()
    every = moves + pages
    title = "while a second analyst decides every 100 ms" if other else "alone"
    print(f"  {title}: opening the results as a session (in process): {opened:.2f} s")
    print(f"    key-to-repaint, 200 cursor moves: median {statistics.median(every) * 1e3:.0f} ms, "
          f"p95 {p95(every) * 1e3:.0f} ms (down p95 {p95(moves) * 1e3:.0f} ms, "
          f"page down p95 {p95(pages) * 1e3:.0f} ms)")
    print(f"    key-to-repaint, 50 decisions (ledger append + fsync): median "
          f"{statistics.median(decisions) * 1e3:.0f} ms, p95 {p95(decisions) * 1e3:.0f} ms"
          + (f"; the screen had read {seen_other:,} of the other analyst's decisions" if other else ""))


def launches(results: Path, runs: int, pythons: list[str], ledger: Path | None = None) -> None:
    """Launch → list and → observations, ``runs`` rounds, each round every python in turn (interleaved),
    wall and CPU time at each; then each python's medians."""
    measured: dict[str, list] = {python: [] for python in pythons}
    with tempfile.TemporaryDirectory() as name:
        for round_ in range(runs):
            for python in pythons:
                folder = Path(name) / f"{round_}-{pythons.index(python)}"
                folder.mkdir()
                listed, observed, cpu, observed_cpu = launch_to_screen(results, folder, python, ledger)
                load = open("/proc/loadavg").read().split()[0] if Path("/proc/loadavg").exists() else "?"
                seen = f"{observed:.2f} s (CPU {observed_cpu:.2f} s)" if observed is not None else "— (none listed)"
                print(f"  {python}: list {listed:.2f} s (CPU {cpu:.2f} s), observations {seen} (load {load})",
                      flush=True)
                nan = float("nan")
                measured[python].append((listed, cpu, nan if observed is None else observed,
                                         nan if observed is None else observed_cpu))
    for python, found in measured.items():
        listed, cpu, observed, observed_cpu = (statistics.median(column) for column in zip(*found))
        print(f"  {python}: medians of {len(found)}: list {listed:.2f} s (CPU {cpu:.2f} s), "
              f"observations {observed:.2f} s (CPU {observed_cpu:.2f} s)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--series", type=int, default=100_000)
    parser.add_argument("--results", type=Path, default=None,
                        help="an existing results file: only launch → list / observations, --runs times")
    parser.add_argument("--runs", type=int, default=3)
    parser.add_argument("--ledger", type=Path, default=None, help="with --results: each launch opens a copy of it")
    parser.add_argument("--python", action="append", default=[],
                        help="interpreter(s) to launch, interleaved (e.g. another checkout's venv); default this one")
    args = parser.parse_args()
    if args.results is not None:
        launches(args.results.resolve(), args.runs, args.python or [sys.executable],
                 args.ledger.resolve() if args.ledger else None)
        return
    asyncio.run(measure(args.series))


if __name__ == "__main__":
    main()
