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

    from pricefold.cli import collector_paused
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
