"""Drive the real triage app on the bundled sample (or a small hostile data set)."""
from __future__ import annotations

import csv
from pathlib import Path

import pytest

from fitcore.ledger import Identity
from tui.app import TriageApp
from tui.factory import Source, open_session, sample_source

ANA = Identity("ana", "ana", "test-host")


@pytest.fixture(autouse=True)
def no_settling(monkeypatch):
    """Pilots press a decision key the moment a series comes up, which the screen refuses from a person (a key
    typed twice: ``SETTLE_SECONDS``); ``test_type_ahead`` puts the pause back to test it."""
    monkeypatch.setattr("tui.screens.triage.SETTLE_SECONDS", 0.0)


def screen_text(app) -> str:
    """What the terminal shows now, as plain text (one line per row)."""
    return "\n".join(strip.text for strip in app.screen._compositor.render_strips())


def box_words(app) -> str:
    """The words of the dialog box on screen, line after line without the list beside it (its border's rows)."""
    inside = [line.split("│")[1] for line in screen_text(app).splitlines() if line.count("│") == 2]
    return " ".join(" ".join(inside).split())


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


def demand_source(path: Path, keys, segment: str, seed: int, prices=(1.0, 2.0), n: int = 20,
                  line=(400.0, 100.0, 20.0)) -> Source:
    """Invented straight-line demand (volume = a − b·price + normal noise, ``line`` = (a, b, noise)) at ``n`` prices
    drawn in ``prices`` for each (product, ``segment`` value) of ``keys``, as a CSV source at ``path``."""
    import numpy as np

    from fitcore.data.columns import Columns
    rng = np.random.default_rng(seed)
    a, b, noise = line
    rows = [(product, value, p, round(a - b * p + rng.normal(0, noise)))
            for product, value in keys for p in np.round(rng.uniform(*prices, n), 2)]
    return csv_source(path, ["product", segment, "price", "volume"], rows, Columns(segments=(segment,)))


def show_rows(capsys, source: Source, out: Path) -> list[str]:
    """``pricefold show``'s rows (no header) for ``source`` fitted to ``out`` (keyed by its columns' segments)."""
    from pricefold.cli import main
    segments = [arg for segment in source.columns.segments for arg in ("--segment", segment)]
    assert main(["fit", str(source.data), *segments, "-o", str(out), "--quiet"]) == 0
    capsys.readouterr()
    assert main(["show", str(out)]) == 0
    return capsys.readouterr().out.splitlines()[1:]


def listed_keys(app, count: int) -> list[str]:
    """The key column of the list's first ``count`` rows as on screen (after each row's status mark)."""
    width = app.screen.series_list.columns(app.screen.series_list.scrollable_content_region.width)[0]
    return [line[2:2 + width] for line in screen_text(app).splitlines()[3:3 + count]]


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
