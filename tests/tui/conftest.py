"""Drive the real triage app on the bundled sample (or a small hostile data set)."""
from __future__ import annotations

import csv
from pathlib import Path

import pytest

from fitcore.ledger import Identity
from tui.app import TriageApp
from tui.factory import Source, open_session, sample_source

ANA = Identity("ana", "ana", "test-host")


def screen_text(app) -> str:
    """What the terminal shows now, as plain text (one line per row)."""
    return "\n".join(strip.text for strip in app.screen._compositor.render_strips())


def make_app(ledger_path: Path, source: Source | None = None, who: Identity = ANA) -> TriageApp:
    source = source or sample_source()
    return TriageApp(lambda progress: open_session(source, ledger_path, who, None, progress))


async def started(app, pilot):
    await app.workers.wait_for_complete()
    await pilot.pause()
    await pilot.pause()
    return app.session


@pytest.fixture
def ledger_path(tmp_path):
    return tmp_path / "ledger.jsonl"


async def until(pilot, check, seconds: float = 8.0) -> None:
    """Let the app run until ``check()`` holds (timers and polls fire late on a busy machine)."""
    import time
    deadline = time.monotonic() + seconds
    while not check():
        if time.monotonic() > deadline:
            raise AssertionError("the screen did not get there in time")
        await pilot.pause(0.05)


async def past_stop_flags(app, pilot) -> None:
    """Put the cursor on the first listed series without a stop flag (accepted without a note)."""
    session = app.session
    session.cursor = next(i for i, s in enumerate(session.view) if session.severity(int(s)) != "stop")
    app.screen.refresh_all()
    await pilot.pause()


async def all_listed(app, pilot):
    """Start the app and list every series; returns the session."""
    session = await started(app, pilot)
    session.set_filter("all", None)
    app.screen.refresh_all()
    await pilot.pause()
    return session


async def on_series(app, pilot, key: dict) -> int:
    """Start the app, list every series and put the cursor on the one keyed ``key``; returns its index."""
    session = await all_listed(app, pilot)
    s = next(int(i) for i in session.view if session.results.data.key_of(int(i)) == key)
    session.cursor = int((session.view == s).nonzero()[0][0])
    app.screen.refresh_all()
    await pilot.pause()
    return s


def csv_source(path: Path, header: list[str], rows, columns) -> Source:
    """``rows`` written under ``header`` as a CSV file at ``path``: a source read with ``columns``."""
    with open(path, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(header)
        writer.writerows(rows)
    return Source(data=path, columns=columns)


def assert_prediction_on_screen(text: str, model: str, reference: dict) -> None:
    """The screen's "MODEL predicts volume V (95% PI LO to HI), elasticity E" equals ``reference`` (a reference
    library's prediction: volume, lo, hi, elasticity) to the digits shown."""
    import re
    said = re.search(rf"{model} predicts volume ([\d,.]+) \(95% PI ([\d,.]+) to ([\d,.]+)\), elasticity (-?\d+\.\d+)",
                     text)
    assert said is not None, text
    volume, lo, hi, elasticity = (float(x.replace(",", "")) for x in said.groups())
    assert volume == pytest.approx(reference["volume"], rel=1e-3)
    assert lo == pytest.approx(reference["lo"], rel=1e-3) and hi == pytest.approx(reference["hi"], rel=1e-3)
    assert elasticity == pytest.approx(reference["elasticity"], abs=0.006)
