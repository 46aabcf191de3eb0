"""What the first screen waits for: the session opens from the app's construction on (not from its first
frame), the triage screen's modules load meanwhile, and plotext only with the first chart — yet the list
shows the same rows and numbers before and after the deferred parts are in."""
from __future__ import annotations

import subprocess
import sys
import threading
from pathlib import Path

from tests.tui.conftest import ANA, screen_text, until
from tui.app import TriageApp
from tui.factory import open_stored_session
from tui.opening import Opening

ROOT = Path(__file__).resolve().parents[2]
SAMPLE = ROOT / "sample"


def test_the_app_module_leaves_the_screen_and_plotext_to_later():
    code = ("import sys, tui.app; print(sorted(m for m in ('tui.screens.triage', 'tui.widgets.charts', "
            "'tui.widgets.evidence', 'plotext', 'tui.session') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, check=True)
    assert out.stdout.strip() == "[]"


async def test_the_session_opens_from_the_apps_construction_on(tmp_path):
    called, release = threading.Event(), threading.Event()

    def opener(progress):
        called.set()
        release.wait(20)
        return open_stored_session(SAMPLE / "results.parquet", tmp_path / "ledger.jsonl", ANA, None, progress)
    app = TriageApp(opener)
    assert called.wait(10)  # before the app runs: not waiting for Textual's start-up and first frame
    async with app.run_test(size=(80, 24)) as pilot:
        assert app.session is None  # still opening: the loading screen
        release.set()
        await until(pilot, lambda: app.session is not None and "listed (" in screen_text(app))
        assert app.session.results.n_series == 180


async def test_a_failure_in_the_opening_thread_is_the_apps_dialog(tmp_path):
    def opener(progress):
        raise OSError("the disk went away")
    app = TriageApp(opener)
    async with app.run_test(size=(80, 24)) as pilot:
        await until(pilot, lambda: "Could not open the triage" in screen_text(app))
        assert "the disk went away" in screen_text(app)


def test_the_opening_module_imports_no_textual():
    """A command line can start the opening thread before importing the app (Textual: ≈ 0.4 s)."""
    code = "import sys, tui.opening; print(sorted(m for m in ('textual', 'tui.app') if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, check=True)
    assert out.stdout.strip() == "[]"


async def test_an_opening_started_before_the_app_is_the_apps_session(tmp_path):
    calls = []

    def opener(progress):
        calls.append(threading.current_thread().name)
        return open_stored_session(SAMPLE / "results.parquet", tmp_path / "ledger.jsonl", ANA, None, progress)
    opening = Opening(opener)
    opened = opening.result()  # the results read before the app is made
    app = TriageApp(opening)
    async with app.run_test(size=(80, 24)) as pilot:
        await until(pilot, lambda: app.session is not None and "listed (" in screen_text(app))
        assert app.session is opened and opened.results.n_series == 180
    assert calls == ["pricefold-opening"]  # opened once, in its own thread


async def test_a_failure_in_an_opening_started_before_the_app_is_the_apps_dialog(tmp_path):
    def opener(progress):
        raise OSError("the disk went away")
    app = TriageApp(Opening(opener))
    async with app.run_test(size=(80, 24)) as pilot:
        await until(pilot, lambda: "Could not open the triage" in screen_text(app))
        assert "the disk went away" in screen_text(app)


FIRST_FRAME = r'''
import asyncio, sys
from pathlib import Path
sys.path.insert(0, {root!r})
from tests.tui.conftest import ANA, screen_text, until
from tui.app import TriageApp
from tui.factory import open_stored_session

async def main():
    app = TriageApp(lambda progress: open_stored_session(Path({results!r}), Path({ledger!r}), ANA, None, progress))
    seen = []
    original = app._display

    def display(screen, renderable):  # each frame as the terminal gets it, and whether plotext was in then
        original(screen, renderable)
        if renderable is not None and type(screen).__name__ == "TriageScreen" and not seen:
            seen.append((("plotext" in sys.modules, "pyarrow.compute" in sys.modules), screen_text(app)))
    app._display = display
    async with app.run_test(size=(120, 40)) as pilot:
        await until(pilot, lambda: bool(seen) and "listed (" in seen[0][1])
        await until(pilot, lambda: "plotext" in sys.modules, 20)  # the charts, once the cursor rests
        await app.workers.wait_for_complete()
        await pilot.pause(0.3)
        later = screen_text(app)
    print(seen[0][0])
    print("=====")
    print(seen[0][1])
    print("=====")
    print(later)

asyncio.run(main())
'''


def test_the_list_is_drawn_before_plotext_loads_and_reads_the_same_after(tmp_path):
    script = FIRST_FRAME.format(root=str(ROOT), results=str(SAMPLE / "results.parquet"),
                                ledger=str(tmp_path / "ledger.jsonl"))
    out = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, cwd=tmp_path, timeout=120)
    assert out.returncode == 0, out.stderr[-2000:]
    loaded, first, later = out.stdout.split("\n=====\n")
    # the first frame of the list did not wait for plotext, nor for pyarrow.compute (0.1 s: the longest label)
    assert loaded.strip() == "(False, False)"
    list_width = 52  # the list pane at 120 columns; the evidence beside it fills in once the cursor rests
    rows_first = [line[:list_width] for line in first.splitlines()[:38]]
    rows_later = [line[:list_width] for line in later.splitlines()[:38]]
    assert rows_first == rows_later
    assert sum("poly" in row or "loglog" in row for row in rows_first) >= 20  # rows with models and scores
    assert "%" in "".join(rows_first)


async def test_the_collector_paused_for_the_launch_runs_again_once_the_list_is_drawn(tmp_path):
    """The command line turns Python's garbage collector off until the first list is drawn (at launch it
    walked the modules' and the session's objects again and again); the app turns it back on then, having
    frozen what the session holds — a long session must not run without it."""
    import gc

    from fitcore.collector import collector_paused
    with collector_paused():
        assert not gc.isenabled()
        app = TriageApp(lambda progress: open_stored_session(SAMPLE / "results.parquet", tmp_path / "ledger.jsonl",
                                                             ANA, None, progress))
        async with app.run_test(size=(80, 24)) as pilot:
            await until(pilot, lambda: app.session is not None and "listed (" in screen_text(app))
            await until(pilot, gc.isenabled)
            assert gc.get_freeze_count() > 0
    assert gc.isenabled()
    gc.disable()
    with collector_paused():
        pass
    assert not gc.isenabled()  # left as it was found
    gc.enable()


FIRST_FRAME_READS = r'''
import asyncio, sys, threading
from pathlib import Path
sys.path.insert(0, {root!r})
import pyarrow.parquet as pq
from tests.tui.conftest import ANA, screen_text, until
from tui.app import TriageApp
from tui.factory import open_stored_session

first_frame, reads = threading.Event(), []
original_read = pq.ParquetFile.read

def read(self, columns=None, *args, **kwargs):  # the candidates' numbers wait for the list's first frame
    if columns is not None and "cv_mse" in columns:
        first_frame.wait(20)
    reads.append(list(columns or ()))
    return original_read(self, columns, *args, **kwargs)
pq.ParquetFile.read = read
WATCHED = {watched!r}

async def main():
    app = TriageApp(lambda progress: open_stored_session(Path({results!r}), Path({ledger!r}), ANA, None, progress))
    seen = []
    original = app._display

    def display(screen, renderable):
        original(screen, renderable)
        if renderable is not None and type(screen).__name__ == "TriageScreen" and not seen:
            text = screen_text(app)
            if "listed (" in text:
                seen.append(([c for r in reads for c in r], [m for m in WATCHED if m in sys.modules], text))
                first_frame.set()
    app._display = display
    async with app.run_test(size=(120, 40)) as pilot:
        await until(pilot, lambda: bool(seen), 30)
        await until(pilot, lambda: "Proposed " in screen_text(app), 30)  # the evidence's numbers, once read
        later = screen_text(app)
    print(sorted(set(seen[0][0])))
    print(seen[0][1])
    print("=====")
    print(seen[0][2])
    print("=====")
    print(later)

asyncio.run(main())
'''
# read only behind the list: the candidates' numbers (the evidence's words), the coefficients, fold errors and
# reasons (its charts and a sign-off)
NOT_BEFORE_THE_LIST = {"cv_mse", "cv_se", "r2", "q2", "plan_volume", "plan_lo", "plan_hi", "plan_elasticity",
                       "smearing", "plan_price", "revenue_price", "window_coef", "fold_mse", "reason"}
# imported only when used: a chart's curves, the override dialog, the backtest of signed curves (results read
# from a file hold theirs), and what the engine's fit brings
NOT_IMPORTED_BEFORE_THE_LIST = ("fitcore.review.evidence", "tui.screens.override", "fitcore.ledger.backtest",
                                "plotext", "pyarrow.compute", "pandas", "numba", "scipy")


def test_the_first_list_reads_its_own_columns_only_and_the_evidence_fills_in_after(tmp_path):
    """The list's first frame reads only the columns the list and the evidence's title show and imports
    nothing it does not draw; the evidence's numbers come just after it, and the list reads the same then."""
    script = FIRST_FRAME_READS.format(root=str(ROOT), results=str(SAMPLE / "results.parquet"),
                                      ledger=str(tmp_path / "ledger.jsonl"), watched=NOT_IMPORTED_BEFORE_THE_LIST)
    out = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, cwd=tmp_path, timeout=120)
    assert out.returncode == 0, out.stderr[-2000:]
    head, first, later = out.stdout.split("\n=====\n")
    read, imported = head.splitlines()
    assert "'n'" in read and "'flags'" in read and not NOT_BEFORE_THE_LIST & set(eval(read)), read
    assert imported == "[]"
    list_width = 52
    rows_first = [line[:list_width] for line in first.splitlines()[:38]]
    assert rows_first == [line[:list_width] for line in later.splitlines()[:38]]
    assert sum("poly" in row or "loglog" in row for row in rows_first) >= 20
    assert "Proposed " not in first  # the evidence: its numbers after the list


def test_the_command_line_reads_no_cycle_module_for_results_fitted_without_a_ledger(tmp_path):
    """``triage RESULTS`` without --ledger refuses the default ledger where the results were fitted against
    another; results fitted without one need nothing of the cycle commands (their module imports the ledger's
    readers and ``show``)."""
    code = ("import sys; from pathlib import Path; from pricefold.ledger_choice import default_for; "
            "from fitcore.results.source import source_from_results; "
            f"source = source_from_results(Path({str(SAMPLE / 'results.parquet')!r}), check_data=False); "
            f"print(default_for(Path({str(SAMPLE / 'results.parquet')!r}), source.fitted_ledger).name, "
            "'pricefold.cycle_cli' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, check=True)
    assert out.stdout.strip() == "results.ledger.jsonl False"
