"""Triage opened on a Parquet results file: the list at once, the observations when the data are read."""
from __future__ import annotations

import json
import shutil
import threading
from pathlib import Path

from pricefold.cli import main
from tests.tui.conftest import ANA, past_stop_flags, screen_text, until
from tui.app import TriageApp
from tui.factory import open_stored_session, refit_stored, source_from_results
from tui.screens.triage import TriageScreen

SAMPLE = Path(__file__).parents[2] / "sample"


def fit_to_parquet(tmp_path: Path) -> tuple[Path, Path]:
    data = tmp_path / "wholesale.csv"
    shutil.copy(SAMPLE / "wholesale.csv", data)
    out = tmp_path / "results.parquet"
    assert main(["fit", str(data), "--segment", "region", "--date", "week", "--plan", str(SAMPLE / "plan.csv"),
                 "-o", str(out), "--quiet"]) == 0
    return data, out


def stored_app(out: Path, ledger_path: Path, gate: threading.Event) -> TriageApp:
    source = source_from_results(out, check_data=False)

    def observer(progress, first=None):
        gate.wait(20)  # the test decides when the data "arrive"
        return refit_stored(source, progress, first)
    return TriageApp(lambda progress: open_stored_session(out, ledger_path, ANA, None, progress), observer=observer)


async def test_the_list_and_decisions_work_before_the_observations_arrive(tmp_path):
    _, out = fit_to_parquet(tmp_path)
    ledger_path, gate = tmp_path / "ledger.jsonl", threading.Event()
    app = stored_app(out, ledger_path, gate)
    async with app.run_test(size=(160, 50)) as pilot:
        await until(pilot, lambda: isinstance(app.screen, TriageScreen))
        await until(pilot, lambda: "reading the data" in screen_text(app))
        assert "• observed" not in screen_text(app)
        await past_stop_flags(app, pilot)  # accepting past a stop flag asks for a note first
        first = app.session.current
        fingerprint = app.session.results.data.fingerprint_of(first)
        await pilot.press("a")
        await until(pilot, lambda: ledger_path.exists() and ledger_path.read_text().strip())
        gate.set()
        await until(pilot, lambda: app.session.results.rows_loaded, seconds=30)
        await until(pilot, lambda: "• observed" in screen_text(app))
        assert app.session.status[first] == "accepted"
    record = json.loads(ledger_path.read_text().splitlines()[0])
    assert record["action"] == "accept" and record["fingerprint"] == fingerprint


async def test_the_series_on_screen_are_observed_before_the_whole_fit(tmp_path):
    """The data read, the series around the cursor are fitted first and drawn while the rest wait; the
    whole fit then replaces them, and the highlighted series' curve is the same chart."""
    _, out = fit_to_parquet(tmp_path)
    source = source_from_results(out, check_data=False)
    hold = threading.Event()

    def observer(progress, first=None):
        def first_then_hold(reading):
            first(reading)
            hold.wait(20)  # the whole fit waits until the test has looked
        return refit_stored(source, progress, first_then_hold)
    app = TriageApp(lambda progress: open_stored_session(out, tmp_path / "ledger.jsonl", ANA, None, progress),
                    observer=observer)
    async with app.run_test(size=(160, 50)) as pilot:
        await until(pilot, lambda: isinstance(app.screen, TriageScreen))
        await until(pilot, lambda: "• observed" in screen_text(app), seconds=30)
        session = app.session
        assert not session.results.rows_loaded
        s = session.current
        early, at = session.observed(s)
        assert early is not session.results and early.data.fingerprint_of(at) == session.results.data.fingerprint_of(s)
        before = str(app.screen.evidence._part("curve").render())
        assert "• observed" in before and "⠤⠤" in before
        hold.set()
        await until(pilot, lambda: session.results.rows_loaded, seconds=30)
        await pilot.pause()
        app.screen.evidence.redraw()
        await pilot.pause()
        assert session.observed(session.current) == (session.results, session.current)
        assert str(app.screen.evidence._part("curve").render()) == before


async def test_changed_data_keep_the_stored_results_and_say_so(tmp_path):
    data, out = fit_to_parquet(tmp_path)
    with data.open("a") as handle:
        handle.write(data.read_text().splitlines()[-1] + "\n")  # the data file no longer matches
    gate = threading.Event()
    gate.set()
    app = stored_app(out, tmp_path / "ledger.jsonl", gate)
    async with app.run_test(size=(160, 50), notifications=True) as pilot:
        await until(pilot, lambda: isinstance(app.screen, TriageScreen))
        await until(pilot, lambda: any("changed since the results were written" in note.message
                                       for note in app._notifications), seconds=30)
        assert not app.session.results.rows_loaded


def test_observations_in_another_series_order_keep_each_series_status(tmp_path):
    """A results folder lists series partition by partition; the fit that brings the observations
    lists them in input order.  Statuses, labels and the cursor must follow the series."""
    import numpy as np

    import fitcore
    from fitcore.data.loader import load
    from fitcore.review.flags import diagnose
    _, out = fit_to_parquet(tmp_path)
    session = open_stored_session(out, tmp_path / "ledger.jsonl", ANA)
    s = int(session.view[2])
    held = session.results.data.key_of(s)
    session.decide(session.look(s), "hold")
    source = source_from_results(out, check_data=False)
    data = load(source.data, source.columns)
    # every series' rows, last series first
    rows = np.concatenate([np.arange(data.offsets[i], data.offsets[i + 1]) for i in range(data.n_series)[::-1]])
    flipped = fitcore.from_columns({k: data.keys[k][np.repeat(np.arange(data.n_series), data.counts)][rows]
                                    for k in data.key_names}, data.price[rows], data.volume[rows],
                                   date=data.date[rows], line=data.line[rows])
    results = fitcore.fit_batch(flipped, source.settings)
    current = session.results.data.key_of(session.current)
    assert session.upgrade(results, diagnose(results))
    t = next(i for i in range(results.n_series) if results.data.key_of(i) == held)
    assert t != s and session.status[t] == "held" and session.results.rows_loaded
    assert session.label(t).startswith(held["product"])
    assert session.results.data.key_of(session.current) == current


def test_another_analysts_decision_read_with_the_observations_makes_the_keys_wait(tmp_path):
    """The whole fit arrives and, in the same look at the ledger, another analyst's decision on the
    highlighted series: it stays listed but no decision key acts on it until the analyst moves."""
    from fitcore import ledger
    from fitcore.ledger import Identity
    from tui.session import Refused
    _, out = fit_to_parquet(tmp_path)
    ledger_path = tmp_path / "ledger.jsonl"
    session = open_stored_session(out, ledger_path, ANA)
    s = session.current
    shown = session.look(s)
    ledger.append(ledger_path, [ledger.Entry(series=shown.key, action="hold", fingerprint=shown.fingerprint,
                                             results=session.results_digest, proposed=shown.proposed)],
                  Identity("bo", "bo", "elsewhere"))
    assert session.upgrade(*refit_stored(source_from_results(out, check_data=False)))
    assert session.current == session.index_of(shown) and session.status[session.current] == "held"
    assert session.waiting
    try:
        session.decide(session.look(session.current), "hold")
    except Refused as exc:
        assert "left the list" in str(exc)
    else:
        raise AssertionError("a decision acted on a series another analyst had just decided")


def app_with_the_rest_held(tmp_path: Path, monkeypatch):
    """A stored-results app whose columns read behind the list wait for the returned event to be set."""
    from fitcore.results.later import LaterColumns
    _, out = fit_to_parquet(tmp_path)
    ledger_path, held = tmp_path / "ledger.jsonl", threading.Event()
    start = LaterColumns.start

    def held_start(self):
        threading.Thread(target=lambda: (held.wait(20), start(self)), daemon=True).start()
    monkeypatch.setattr(LaterColumns, "start", held_start)
    return stored_app(out, ledger_path, threading.Event()), ledger_path, held


async def test_an_accept_pressed_before_the_file_is_all_read_waits_then_acts_on_that_series(tmp_path, monkeypatch):
    """Accept records the curve's interval parts, read behind the list: pressed before they are in, the key
    says it waits, then acts on the series it was pressed on, and the record holds the whole snapshot."""
    from tui.messages import EvidenceReady
    app, ledger_path, held = app_with_the_rest_held(tmp_path, monkeypatch)
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        await until(pilot, lambda: isinstance(app.screen, TriageScreen))
        shown = app.session.shown
        await pilot.press("a")
        await until(pilot, lambda: any("the key acts when it is in" in n.message for n in app._notifications))
        assert not ledger_path.exists()
        app.post_message(EvidenceReady())  # the engine's loops came in first: the key keeps waiting
        await pilot.pause()
        assert not ledger_path.exists() and "Say why" not in screen_text(app)
        held.set()
        await until(pilot, lambda: "Say why" in screen_text(app))  # a stop flag: the note first, as ever
        await pilot.press(*"seen", "enter")
        await until(pilot, lambda: ledger_path.exists() and ledger_path.read_text().strip())
    record = json.loads(ledger_path.read_text().splitlines()[0])
    assert record["action"] == "accept" and record["series"] == shown.key
    assert record["signed"]["cov_unscaled"] is not None and "incomplete" not in record["signed"]


async def test_a_waiting_accept_does_nothing_once_the_analyst_moved_and_says_so(tmp_path, monkeypatch):
    """Pressed before the interval parts are in, then the cursor moves: when they arrive, nothing is
    recorded on either series (a decision is bound to the series on screen) and a warning says so."""
    app, ledger_path, held = app_with_the_rest_held(tmp_path, monkeypatch)
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        await until(pilot, lambda: isinstance(app.screen, TriageScreen))
        pressed = app.session.label(app.session.current)
        await pilot.press("a")
        await until(pilot, lambda: any("the key acts when it is in" in n.message for n in app._notifications))
        await pilot.press("down")
        await until(pilot, lambda: app.session.label(app.session.current) != pressed)
        held.set()
        await until(pilot, lambda: any(n.message.startswith("Not done: accept on " + pressed)
                                       for n in app._notifications), seconds=30)
        await pilot.pause()
        assert "Say why" not in screen_text(app)
    assert not ledger_path.exists() or not ledger_path.read_text().strip()


async def test_observations_arriving_under_a_dialog_are_drawn_when_it_closes(tmp_path):
    """The data come in while a dialog covers the screen: closing it shows the observations at once, without
    moving the cursor (they waited for a move before)."""
    _, out = fit_to_parquet(tmp_path)
    gate = threading.Event()
    app = stored_app(out, tmp_path / "ledger.jsonl", gate)
    async with app.run_test(size=(160, 50)) as pilot:
        await until(pilot, lambda: isinstance(app.screen, TriageScreen))
        triage = app.screen
        await until(pilot, lambda: any(w.group == "observations" for w in app.workers))  # reading the data
        await pilot.press("question_mark")
        await until(pilot, lambda: app.screen is not triage)
        gate.set()
        await until(pilot, lambda: app.session.results.rows_loaded, seconds=30)
        await pilot.pause()
        await pilot.press("escape")
        await until(pilot, lambda: app.screen is triage)
        await until(pilot, lambda: "• observed" in str(triage.evidence._part("curve").render()), seconds=5)


async def test_results_whose_data_file_is_gone_open_from_the_stored_numbers_and_say_so(tmp_path):
    """The data file moved away: the list opens from the results file (it was exit 2), the chart says the data
    file (named) was not found, and an accept signs the stored numbers — those a fit of the data gives."""
    import numpy as np

    from fitcore.data.keys import SeriesKeys
    from fitcore.errors import DataError
    from fitcore.ledger.snapshot import from_results
    from pricefold.triage_cli import triage_app
    data, out = fit_to_parquet(tmp_path)
    data.rename(tmp_path / "moved.csv")
    source = source_from_results(out, check_data=False)
    try:
        refit_stored(source)
    except DataError as exc:
        assert str(data) in str(exc) and "not found" in str(exc)
    else:
        raise AssertionError("a refit without its data file")
    ledger_path = tmp_path / "ledger.jsonl"
    app = triage_app(source, ledger_path, "ana", stored=out)
    async with app.run_test(size=(160, 50), notifications=True) as pilot:
        await until(pilot, lambda: isinstance(app.screen, TriageScreen))
        await until(pilot, lambda: any(str(data) in note.message and "not found" in note.message
                                       for note in app._notifications))
        curve = app.screen.evidence._part("curve")
        await until(pilot, lambda: f"{data} was not found: observations and the refit are unavailable"
                    in str(curve.render()).replace("\n", " "), seconds=30)
        assert "reading the data" not in str(curve.render())
        await past_stop_flags(app, pilot)
        key = app.session.shown.key
        await pilot.press("a")
        await until(pilot, lambda: ledger_path.exists() and ledger_path.read_text().strip(), seconds=30)
    record = json.loads(ledger_path.read_text().splitlines()[0])
    data.with_name("moved.csv").rename(data)
    fitted, _ = refit_stored(source_from_results(out, check_data=False))  # the data's own fit, as reference
    s = int(SeriesKeys.of(fitted.data).indices_of([key])[0])
    expected = from_results(fitted, [s], fitted.names.index(record["model"]))[0]
    assert record["action"] == "accept" and record["fingerprint"] == fitted.data.fingerprint_of(s)
    assert "incomplete" not in record["signed"]
    for name in ("coef", "cv_mse", "sigma2", "n", "price_range", "cov_unscaled"):
        got, want = np.ravel(record["signed"][name]), np.ravel(expected[name])
        assert np.allclose(got, want, rtol=1e-9, atol=0), name


async def test_results_replaced_on_disk_while_the_screen_is_open_are_said(tmp_path):
    """A trial refitted into the results file the screen had open: nothing on screen changed and a decision went
    on to be recorded on the old rows, the analyst none the wiser.  The header says it (and a notice) within a
    look; the decisions stay bound to the rows on screen."""
    import os
    data, out = fit_to_parquet(tmp_path)
    ledger_path, gate = tmp_path / "ledger.jsonl", threading.Event()
    app = stored_app(out, ledger_path, gate)
    async with app.run_test(size=(100, 30)) as pilot:
        await until(pilot, lambda: isinstance(app.screen, TriageScreen))
        await pilot.pause(2.5)  # a look or more at the ledger with the file as it was: nothing said
        assert "replaced on disk" not in screen_text(app)
        newer = tmp_path / "newer.parquet"
        assert main(["fit", str(data), "--segment", "region", "--date", "week", "--folds", "3", "-o", str(newer),
                     "--quiet"]) == 0
        os.replace(newer, out)  # as a fit's own atomic write puts it in place
        await until(pilot, lambda: "results.parquet was replaced on disk" in screen_text(app))
        await past_stop_flags(app, pilot)
        s = app.session.current
        fingerprint = app.session.results.data.fingerprint_of(s)
        await pilot.press("a")
        await until(pilot, lambda: ledger_path.exists() and ledger_path.read_text().strip())
        gate.set()
    record = json.loads(ledger_path.read_text().splitlines()[0])
    assert record["fingerprint"] == fingerprint  # the rows on screen, as opened
