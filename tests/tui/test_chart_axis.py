"""Chart y axes: round ticks, evenly spaced in value and in rows, each on a row, so a point can be read
against the axis (the fold chart's ◆ on the row of the chosen candidate's CV error)."""
from __future__ import annotations

import re

import numpy as np
import pytest

from tests.tui.conftest import ANA
from tui.factory import open_session, sample_source
from tui.widgets.charts import curve_chart, even_ticks, fold_chart

LABEL = re.compile(r"^\s*(-?[\d,]*\.?\d+)\s*[┤├]")


@pytest.fixture(scope="module")
def session(tmp_path_factory):
    return open_session(sample_source(), tmp_path_factory.mktemp("axis") / "ledger.jsonl", ANA)


def y_labels(chart: str) -> list[tuple[int, float]]:
    """(row, value) of every labelled row of a chart's plot area."""
    out = []
    for row, line in enumerate(chart.splitlines()):
        found = LABEL.match(line)
        if found:
            out.append((row, float(found.group(1).replace(",", ""))))
    return out


def assert_even(labels: list[tuple[int, float]]) -> None:
    assert len(labels) >= 3, labels
    rows = np.diff([row for row, _ in labels])
    values = np.diff([value for _, value in labels])
    assert len(set(rows.tolist())) == 1, labels  # evenly spaced rows
    assert np.allclose(values, values[0], rtol=2e-3), labels  # evenly spaced values (labels rounded)


@pytest.mark.parametrize("rows", range(4, 30))
@pytest.mark.parametrize("lo, hi", [(803, 2613), (-294, 22044), (0.013, 0.0372), (117.9, 131.0), (5, 5)])
def test_even_ticks_cover_the_range_on_rows(lo, hi, rows):
    bottom, top, ticks = even_ticks(lo, hi, rows)
    unit = (top - bottom) / (rows - 1)
    assert bottom <= lo + 1e-9 * unit and top >= hi - 1e-9 * unit
    positions = (np.array(ticks) - bottom) / unit
    assert np.allclose(positions, np.round(positions), atol=1e-6)  # each tick on a row
    assert len(set(np.diff(np.round(positions)).tolist())) <= 1  # every k rows
    assert all(bottom - 1e-9 * unit <= t <= top + 1e-9 * unit for t in ticks)
    assert (2 if rows < 5 else 3) <= len(ticks) <= 7


@pytest.mark.parametrize("label", ["lemons 500 g · East", "table salt 1 kg · South", "fresh figs 500 g · South",
                                   "dried apricots 500 g · East"])
@pytest.mark.parametrize("height", [12, 18])
def test_the_curve_chart_labels_rows_evenly(session, label, height):
    results = session.results
    s = next(i for i in range(results.n_series) if session.label(i) == label)
    assert_even(y_labels(curve_chart(results, s, 70, height, int(results.chosen[s]), {}).plain))


def test_a_log_scale_fold_chart_labels_rows_evenly(session):
    """On a log scale the labels are evenly spaced in rows and in log10 of their values."""
    results = session.results
    checked = 0
    for s in range(results.n_series):
        chart = fold_chart(results, s, 70, 12).plain
        if "log scale" not in chart:
            continue
        labels = [(row, float(np.log10(value))) for row, value in y_labels(chart)]
        assert_even(labels)
        checked += 1
    assert checked >= 5


def test_the_fold_chart_marks_the_chosen_error_on_its_row(session):
    """Every series whose fold chart is on a linear scale: labels even, and ◆ on the row nearest to the chosen
    candidate's CV error as the labels read."""
    results = session.results
    checked = 0
    for s in range(results.n_series):
        chart = fold_chart(results, s, 70, 9).plain
        if "log scale" in chart or results.chosen[s] < 0:
            continue
        labels = y_labels(chart)
        assert_even(labels)
        (r0, v0), (r1, v1) = labels[0], labels[1]
        per_row = (v0 - v1) / (r1 - r0)
        row = next(i for i, line in enumerate(chart.splitlines()) if "◆" in line and "chosen" not in line)
        expected = r0 + (v0 - float(results.cv_mse[s, results.chosen[s]])) / per_row
        assert abs(row - expected) <= 0.5 + 1e-9, (session.label(s), row, expected, labels)
        checked += 1
    assert checked >= 20


def test_a_fold_error_of_exactly_zero_on_a_log_scale_is_drawn_not_fatal(tmp_path):
    """Twelve rows on a straight line: the polynomials' held-out errors are rounding noise, one fold's exactly 0,
    and the constant's far above, so the chart goes to a log scale — where plotext took log10(0) and the screen
    died (a trial's results could not be opened).  The positive points are drawn, down to the noise."""
    import fitcore
    price = 1 + 0.5 * np.arange(12)
    data = fitcore.from_columns({"product": np.array(["straight line"] * 12, dtype=object)}, price,
                                1200 - 200 * (price - 1))
    results = fitcore.fit_batch(data, plan_price=3.0)
    folds = results.folds_of(0)
    assert (folds == 0).any() and (folds > 0).any()  # an exact zero among the fold errors (numpy's own lstsq agrees:
    # a fold's held-out row lies on the line through the others, the residual rounds to nothing or to 0)
    chart = fold_chart(results, 0, 70, 18).plain
    assert "log scale" in chart and "◆" in chart and "1e-" in chart  # the noise-level errors on the axis too


async def test_a_chart_that_cannot_be_drawn_is_said_where_it_would_be_and_the_screen_goes_on(tmp_path, monkeypatch):
    """Whatever a chart meets, the screen stays: the fault is said in the chart's place."""
    import tui.widgets.evidence as evidence
    from tests.tui.conftest import make_app, screen_text, started, until

    def broken(*args, **kwargs):
        raise ValueError("math domain error")
    monkeypatch.setattr(evidence, "fold_chart", broken)
    app = make_app(tmp_path / "ledger.jsonl")
    async with app.run_test(size=(160, 50)) as pilot:
        await started(app, pilot)
        await until(pilot, lambda: "chart could not be drawn (ValueError: math domain error)" in screen_text(app))
        await pilot.press("down")
        await pilot.pause()
        assert app.is_running
