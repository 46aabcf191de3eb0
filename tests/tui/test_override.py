"""Overriding with the numbers on screen (issue case 3): the dialog's numbers are those of
``pricefold show`` and of the results file, and after an override everything shows the model that stands."""
from __future__ import annotations

import csv
import json
import shutil
from pathlib import Path

import pytest

from fitcore.review.evidence import runner_up
from fitcore.review.formats import fmt
from pricefold.cli import main
from tests.tui.conftest import ANA, screen_text, started, until
from tui.app import TriageApp
from tui.factory import open_session, source_from_results
from tui.screens.override import OverrideDialog

SAMPLE = Path(__file__).parents[2] / "sample"
LEMONS = {"product": "lemons 500 g", "region": "East"}


@pytest.fixture(params=["json"])
def fitted(tmp_path, request):
    data = tmp_path / "wholesale.csv"
    shutil.copy(SAMPLE / "wholesale.csv", data)
    out = tmp_path / f"results.{request.param}"
    assert main(["fit", str(data), "--segment", "region", "--date", "week", "--plan", str(SAMPLE / "plan.csv"),
                 "-o", str(out), "--quiet"]) == 0
    return out


def show_lines(out: Path, capsys) -> list[str]:
    capsys.readouterr()
    assert main(["show", str(out), "--product", LEMONS["product"], "--key", f"region={LEMONS['region']}"]) == 0
    return capsys.readouterr().out.splitlines()


async def override_lemons(app, pilot, ledger_path: Path) -> tuple[int, str]:
    session = await started(app, pilot)
    s = next(int(i) for i in session.view if session.results.data.key_of(int(i)) == LEMONS)
    session.cursor = int((session.view == s).nonzero()[0][0])
    app.screen.refresh_all()
    await pilot.pause()
    await pilot.press("o")
    await pilot.pause()
    runner = session.results.names[runner_up(session.results, s)]
    options = app.screen.query_one("#dialog-options")
    assert options.get_option_at_index(options.highlighted).id == "poly1"  # opens on the proposal
    options.highlighted = [row.name for row in app.screen.rows].index(runner)  # the runner-up picked by hand
    await pilot.pause()
    return s, runner


async def test_the_override_dialog_shows_every_candidate_as_pricefold_show_does(fitted, tmp_path, capsys):
    ledger_path = tmp_path / "ledger.jsonl"
    lines = show_lines(fitted, capsys)  # before the app starts: it captures printing while it runs
    app = TriageApp(lambda progress: open_session(source_from_results(fitted), ledger_path, ANA, None, progress))
    async with app.run_test(size=(160, 50)) as pilot:
        s, runner = await override_lemons(app, pilot, ledger_path)
        dialog = app.screen
        assert isinstance(dialog, OverrideDialog)
        text = screen_text(app)
        rows = {row.name: row for row in dialog.rows}
        # pricefold show: "✓ poly1          117.9      15.53    98%    98%" per available candidate
        shown = [line.split() for line in lines if line[2:].startswith(("poly", "loglog"))]
        candidates = [parts[1:] if parts[0] == "✓" else parts for parts in shown]
        available = [parts for parts in candidates if parts[1] != "unavailable:"]
        assert sorted(rows) == sorted(parts[0] for parts in available)
        options = dialog.query_one("#dialog-options")
        prompts = {options.get_option_at_index(i).id: options.get_option_at_index(i).prompt.plain.split("\n")[0]
                   for i in range(options.option_count)}
        for name, cv, se, q2, _ in available:
            assert (rows[name].cv_mse, rows[name].cv_se, rows[name].q2) == (cv, se, q2)
            assert prompts[name].replace("✓", "").split()[:4] == [name, cv, se, q2]
            assert rows[name].volume in prompts[name] and rows[name].interval in prompts[name]
        assert prompts[runner] in text  # on screen as built
        # the proposal's plan numbers, as show prints them
        plan = next(line for line in lines if line.startswith("plan price"))
        proposed = next(row for row in dialog.rows if row.proposed)
        assert f"volume {proposed.volume} (95% prediction interval {proposed.interval})" in plan
        assert (f"elasticity {proposed.elasticity}" in plan if proposed.elasticity != "—" else
                "no elasticity (the volume is not above zero)" in plan)  # a negative volume has none
        # every candidate's plan volume as the results file holds it
        record = next(r for r in json.loads(fitted.read_text())["series"] if r["key"] == LEMONS)
        for cand in record["candidates"]:
            if cand["available"]:
                assert rows[cand["name"]].volume == fmt(cand["plan_volume"])
        # a flat curve's elasticity is its shape's, not a measurement: said so, not 0.00 beside measured ones
        flat = next(cand for cand in record["candidates"] if cand["name"] == "poly0")
        assert flat["available"] and flat["plan_volume"] > 0 and rows["poly0"].elasticity == "flat"
        assert all(row.elasticity != "flat" for name, row in rows.items() if name != "poly0")
        # each candidate's own flags: the proposal's are the series' shape and range flags
        assert set(proposed.flags) == {f["code"] for f in record["flags"]} & {"rising", "below-zero", "outside-range"}
        assert options.get_option_at_index(options.highlighted).id == runner  # as moved to by override_lemons


async def test_after_an_override_the_list_and_the_evidence_show_the_model_that_stands(fitted, tmp_path):
    ledger_path = tmp_path / "ledger.jsonl"
    app = TriageApp(lambda progress: open_session(source_from_results(fitted), ledger_path, ANA, None, progress))
    async with app.run_test(size=(160, 50)) as pilot:
        s, runner = await override_lemons(app, pilot, ledger_path)
        session = app.session
        await pilot.press("enter")
        await pilot.pause()
        await pilot.press(*"volumes cannot go below zero", "enter")
        await pilot.pause()
        [record] = [json.loads(line) for line in ledger_path.read_text().splitlines()]
        assert record["model"] == runner and record["proposed"] == "poly1"
        session.set_filter("all")
        session.bring(s)
        app.screen.refresh_all()
        c = session.results.names.index(runner)
        app.screen.evidence.scroll_end(animate=False)  # the chart's legend, below the words
        await until(pilot, lambda: f"{runner} (override)" in screen_text(app))
        app.screen.evidence.scroll_home(animate=False)
        await until(pilot, lambda: "Overridden to " in screen_text(app))
        text = screen_text(app)
        row = next(line for line in text.splitlines() if line.startswith("↺ lemons 500 g · East"))
        assert f" {runner} " in row
        # its own score (Q²), not the proposal's; the shares as the list prints them (tui.cells.percent)
        from tui.cells import percent
        assert row.split(f" {runner} ")[1].split()[0] == percent(session.results.q2[s, c])
        assert f"{runner} predicts volume {fmt(session.results.plan_volume[s, c])}" in text
        assert f"(95% PI {fmt(session.results.plan_lo[s, c])} to {fmt(session.results.plan_hi[s, c])})" in text
        assert "Overridden to " + runner in text


@pytest.mark.parametrize("fitted", ["json", "parquet"], indirect=True)
def test_export_writes_the_overriding_models_interval(fitted, tmp_path):
    from fitcore import ledger
    from tui.factory import open_session as open_
    session = open_(source_from_results(fitted), tmp_path / "ledger.jsonl", ANA)
    s = next(i for i in range(session.results.n_series) if session.results.data.key_of(i) == LEMONS)
    c = runner_up(session.results, s)
    session.decide(session.look(s), "override", model=session.results.names[c], note="checked")
    assert ledger.verify(tmp_path / "ledger.jsonl") == []
    out = tmp_path / "decisions.csv"
    assert main(["ledger", "export", str(tmp_path / "ledger.jsonl"), "--results", str(fitted), "-o", str(out)]) == 0
    row = next(r for r in csv.DictReader(out.open()) if r["product"] == LEMONS["product"] and r["region"] == "East")
    assert row["model"] == session.results.names[c]
    assert float(row["plan_volume"]) == pytest.approx(session.results.plan_volume[s, c], rel=1e-9)
    assert float(row["plan_lo"]) == pytest.approx(session.results.plan_lo[s, c], rel=1e-9)
    assert float(row["plan_hi"]) == pytest.approx(session.results.plan_hi[s, c], rel=1e-9)


async def test_at_80x24_the_candidates_start_at_a_whole_row_with_the_proposal_in_view(tmp_path):
    # Two lines a candidate, nine lines of list: the dialog once opened with a flags line on top whose
    # model was scrolled away, so it read as the next model's.
    from tests.tui.conftest import make_app
    app = make_app(tmp_path / "ledger.jsonl")
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        s = next(int(i) for i in session.view if session.label(int(i)) == "truffle oil 250 ml · East")
        session.cursor = int((session.view == s).nonzero()[0][0])
        app.screen.refresh_all()
        await pilot.pause()
        await pilot.press("o")
        await pilot.pause()
        await pilot.pause()
        rows = [line for line in screen_text(app).splitlines() if "▊" in line and "▔" not in line and "▁" not in line]
        first = rows[0].split("▊", 1)[1]
        assert first.lstrip(" ✓↺").split()[0] in app.screen.results.names  # a model's line, not a flags line
        assert any("proposed" in row for row in rows)


@pytest.mark.parametrize("size", [(40, 10), (80, 24)])
async def test_the_override_dialog_shows_whole_models_on_a_small_terminal(fitted, tmp_path, size):
    """At 40×10 the title, head and hint take a line each and the explanation goes: the models keep the rows,
    each on its two lines (a wrapped row would not line up with the head)."""
    ledger_path = tmp_path / "ledger.jsonl"
    app = TriageApp(lambda progress: open_session(source_from_results(fitted), ledger_path, ANA, None, progress))
    async with app.run_test(size=size) as pilot:
        s, runner = await override_lemons(app, pilot, ledger_path)
        await pilot.pause()
        dialog = app.screen
        assert isinstance(dialog, OverrideDialog)
        options = dialog.query_one("#dialog-options")
        assert options.scrollable_content_region.height >= 4  # two models, whole
        text = screen_text(app)
        assert f"  {runner} " in text and "Esc to cancel" in text
        assert options.virtual_size.height == 2 * len(dialog.rows)


async def test_a_scroll_fix_up_that_runs_while_the_dialog_closes_does_nothing(fitted, tmp_path):
    """CI found ``NoMatches: 'OptionList' on OverrideDialog()`` (keys typed fast): a fix-up queued by the last move
    ran while the answered dialog was still attached but its list already removed, and ended the app."""
    ledger_path = tmp_path / "ledger.jsonl"
    app = TriageApp(lambda progress: open_session(source_from_results(fitted), ledger_path, ANA, None, progress))
    async with app.run_test(size=(160, 50)) as pilot:
        await override_lemons(app, pilot, ledger_path)
        dialog = app.screen
        assert isinstance(dialog, OverrideDialog)
        await dialog.query_one("#dialog-options").remove()  # as closing removes the children first
        assert dialog.is_attached
        dialog._whole_rows()
        dialog._from_a_whole_row()  # before: NoMatches, raised in the app
        await pilot.pause()
        assert app.is_running
