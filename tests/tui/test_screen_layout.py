"""What the screen shows at 80×24, 100×30, 120×40 and 200×60: header, rows, evidence, charts."""
from __future__ import annotations

import csv
import re
from pathlib import Path

import numpy as np
import pytest
from rich.cells import cell_len

from fitcore.data.loader import Columns
from tests.tui.conftest import ANA, make_app, screen_text, started, until
from tui.app import TriageApp
from tui.factory import Source, fit_source, open_session, sample_source
from tui.session import STATUSES
from tui.widgets.charts import OBSERVED, STANDING, curve_chart, fold_chart, price_grid

ALL_SIZES = [(80, 24), (100, 30), (120, 40), (200, 60)]


@pytest.mark.parametrize("size", ALL_SIZES)
async def test_the_header_shows_every_count_whole(ledger_path, size):
    app = make_app(ledger_path)
    async with app.run_test(size=size) as pilot:
        session = await started(app, pilot)
        counts = session.counts()
        header = "\n".join(screen_text(app).splitlines()[:2])
        for name in ("attention", *STATUSES):
            word = {"attention": "(attention|attn)", "pending": "(pending|pend)", "accepted": "(accepted|acc)",
                    "overridden": "(overridden|ovr)"}.get(name, name)
            assert re.search(rf"{word} {counts[name]:,}\b", header), (name, header)
        assert f"{len(session.view)} listed (needs a decision; by attention)" in header


async def test_rows_stay_distinct_when_names_are_cut(ledger_path):
    app = make_app(ledger_path)
    # 110 columns, the narrowest with both panes: from about 120 on the sample's names are whole
    # (test_screen_widths.py, test_names_keep_their_middle_in_the_two_pane_list)
    async with app.run_test(size=(110, 40)) as pilot:
        await started(app, pilot)
        rows = [line.split("▕")[0] for line in screen_text(app).splitlines() if "truff" in line]
        assert len(rows) == 3 and len(set(rows)) == 3
        assert sorted(row.split("·")[-1].split()[0] for row in rows) == ["East", "North", "South"]
        assert all("…250 ml" in row for row in rows)  # the product name lost its middle, not the region


def wide_source(tmp_path) -> Source:
    names = ["松茸の天ぷら 大盛り", "café crème brûlée", "family pack 👩\u200d👩\u200d👧", "e\u0301clair x\u0308",
             "plain"]  # CJK, accents, emoji with joiners, combining marks
    path = tmp_path / "wide.csv"
    rng = np.random.default_rng(1)
    with open(path, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["product", "region", "price", "volume"])
        for name in names:
            for region in ("東", "West"):
                for _ in range(30):
                    price = round(rng.uniform(1, 3), 2)
                    writer.writerow([name, region, price, round(500 - 100 * price + rng.normal(0, 5))])
    return Source(data=path, columns=Columns(segments=("region",)))


@pytest.mark.parametrize("size", [(80, 24), (120, 40)])
async def test_rows_align_by_display_cells_whatever_the_names_hold(tmp_path, size):
    app = make_app(tmp_path / "ledger.jsonl", wide_source(tmp_path))
    async with app.run_test(size=size) as pilot:
        session = await started(app, pilot)
        session.set_filter("all", None)
        app.screen.refresh_all()
        await pilot.pause()
        rows = [line.split("▕")[0] for line in screen_text(app).splitlines()[3:]
                if re.search(r" 30 (poly|loglog)", line)]
        assert len(rows) == 10
        starts = {cell_len(row[:re.search(r" 30 (poly|loglog)", row).start()]) for row in rows}
        assert len(starts) == 1, rows  # the n column starts at the same cell in every row


@pytest.mark.parametrize("size", [(80, 24), (120, 40)])
async def test_no_sideways_scrollbar_and_the_first_row_is_current(ledger_path, size):
    app = make_app(ledger_path)
    async with app.run_test(size=size) as pilot:
        session = await started(app, pilot)
        listing = app.screen.series_list
        assert not listing.show_horizontal_scrollbar and listing.virtual_size.width <= listing.size.width
        assert session.cursor == 0 and listing.scroll_y == 0


@pytest.mark.parametrize("size", [(80, 24), (120, 40)])
async def test_a_notification_hides_no_listed_row_and_the_cursor_stays_in_view(ledger_path, size):
    from textual.widgets._toast import Toast
    app = make_app(ledger_path)
    async with app.run_test(size=size, notifications=True) as pilot:
        session = await started(app, pilot)
        listing = app.screen.series_list
        rows = listing.scrollable_content_region.height - 1  # under the header
        for _ in range(rows - 1):  # the cursor on the last row on screen
            await pilot.press("down")
        await pilot.press("u")  # nothing to revoke: a warning shows
        await until(pilot, lambda: app.screen.query(Toast))
        await pilot.pause()
        toast = app.screen.query_one(Toast).region
        assert not toast.overlaps(listing.region), (toast, listing.region)
        assert listing.scroll_y <= session.cursor < listing.scroll_y + listing.scrollable_content_region.height - 1
        assert session.label_parts(session.current)[-1] in screen_text(app).splitlines()[
            listing.region.y + 1 + session.cursor - int(listing.scroll_y)]


async def test_the_charts_keep_their_width_whether_or_not_the_evidence_scrolls(ledger_path):
    """At 160×70 some series' evidence fits the panel and some overflows it: the scrollbar's room is kept
    either way, so a chart is drawn the same width for every series (it moved by 2 columns)."""
    app = make_app(ledger_path)
    async with app.run_test(size=(160, 70)) as pilot:
        await started(app, pilot)
        evidence = app.screen.evidence
        seen = {}
        for _ in range(12):
            await pilot.pause(0.3)
            frame = str(evidence._part("folds").render()).splitlines()[0]  # the chart's top edge
            assert frame.strip().startswith("┌")
            seen.setdefault(evidence.max_scroll_y > 0, set()).add((evidence.scrollable_content_region.width,
                                                                   cell_len(frame.rstrip())))
            await pilot.press("down")
        assert set(seen) == {True, False}  # both kinds were shown
        assert len(seen[True] | seen[False]) == 1, seen


async def test_at_80x24_the_words_come_before_the_charts(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        results = session.results
        codes = lambda s: {f["code"] for f in session.diagnosis.flags_of(s)}  # noqa: E731
        lowest = lambda s: np.argmin(np.where(results.available[s], results.cv_mse[s], np.inf))  # noqa: E731
        # a listed series flat-priced and weakly fitted, whose proposal poly0 is its lowest CV error
        session.cursor = next(i for i, s in enumerate(session.view) if {"flat-price", "weak-fit"} <= codes(s)
                              and results.names[int(results.chosen[s])] == "poly0" and lowest(s) == results.chosen[s])
        app.screen.refresh_all()
        await pilot.pause()
        await pilot.press("tab")
        await until(pilot, lambda: "Plan price" in screen_text(app))
        text = screen_text(app)
        assert "! [stop] flat-price" in text and "? [warn] weak-fit" in text
        assert text.index("[stop]") < text.index("[warn]")
        assert "Proposed poly0 (one-se): lowest mean CV error" in text
        assert "Q² −2%: worse than predicting the average volume" in text
        # the trade's caution where the plan's number is read (before: only under ?, in show and the report)
        assert "Observational data: whatever else moved with price is in this curve too." in text  # one line
        assert "above the highest price observed" in text
        assert session.label(session.current) in text


async def test_each_series_opens_at_the_top_of_its_evidence(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(160, 50)) as pilot:
        await started(app, pilot)
        evidence = app.screen.evidence
        await until(pilot, lambda: evidence.max_scroll_y > 0)
        evidence.scroll_end(animate=False, immediate=True)
        await pilot.pause()
        assert evidence.scroll_y > 0
        await pilot.press("down")
        await pilot.pause()
        assert evidence.scroll_y == 0


async def test_units_from_the_settings_file_are_shown(tmp_path):
    source = sample_source()
    source.units = {"price": "EUR", "volume": "cases/week"}
    app = TriageApp(lambda progress: open_session(source, tmp_path / "l.jsonl", ANA, None, progress))
    async with app.run_test(size=(160, 50)) as pilot:
        await started(app, pilot)
        await until(pilot, lambda: "price (EUR)" in screen_text(app))
        text = screen_text(app)
        assert re.search(r"predicts volume [\d,.]+ cases/week", text) and re.search(r"Plan price [\d.]+ EUR", text)


def colours_of(text, predicate) -> set[str]:
    """The colours of the characters of a rich Text for which ``predicate(char)`` holds."""
    found = set()
    for span in text.spans:
        if any(predicate(ch) for ch in text.plain[span.start:span.end]) and span.style:
            style = span.style if not isinstance(span.style, str) else None
            if style is not None and style.color is not None:
                found.add(style.color.name)
    return found


def test_legend_colours_are_those_of_the_lines_and_the_price_axis_holds_the_plan():
    results, _ = fit_source(sample_source())
    lemons = {"product": "lemons 500 g", "region": "East"}
    s = next(i for i in range(results.n_series) if results.data.key_of(i) == lemons)
    chart = curve_chart(results, s, 70, 14, int(results.chosen[s]), {})
    body, legend = chart.plain.rsplit("\n", 1)
    cut = len(body) + 1
    braille = colours_of(chart[:cut], lambda ch: 0x2800 < ord(ch) <= 0x28FF)
    assert braille == {f"color({STANDING})"}  # the solid line is the standing model's
    assert colours_of(chart[cut:], lambda ch: ch == "⠤") == braille
    assert colours_of(chart[:cut], lambda ch: ch == "•") == {f"color({OBSERVED})"} == colours_of(
        chart[cut:], lambda ch: ch == "•")
    assert OBSERVED >= 250  # near white: visible on a dark background
    grid = price_grid(float(results.price_lo[s]), float(results.price_hi[s]), float(results.plan_price[s]), True)
    plan, lo = results.plan_price[s], results.price_lo[s]
    assert grid[0] < lo and grid[-1] > plan and grid[-1] - plan > 0.05 * (plan - lo)
    ticks = [float(t) for t in re.findall(r"\d+\.\d+", body.splitlines()[-2])]
    assert max(ticks) >= plan


def test_the_fold_chart_goes_to_a_log_scale_when_one_error_dwarfs_the_rest():
    results, _ = fit_source(sample_source())
    errors = [results.cv_mse[s][results.available[s]] for s in range(results.n_series)]
    ratio = [np.nanmax(e) / np.nanmin(e) for e in errors]
    big, small = int(np.argmax(ratio)), int(np.argmin(ratio))
    assert ratio[big] > 50 and ratio[small] < 1.1
    assert "(log scale)" in fold_chart(results, big, 70, 12).plain
    assert "(log scale)" not in fold_chart(results, small, 70, 12).plain


def test_the_settings_file_names_the_units(tmp_path):
    from fitcore.data.config import load_config as load
    from fitcore.errors import SettingsError
    from pricefold.options import settings_file_keys

    def load_config(path):  # the keys come from the one table of settings (and [units], [thresholds])
        return load(path, settings_file_keys())
    path = tmp_path / "pricefold.toml"
    path.write_text('[units]\nprice = "EUR"\nvolume = "cases/week"\n', encoding="utf-8")
    assert load_config(path)["units"] == {"price": "EUR", "volume": "cases/week"}
    path.write_text("[units]\nprice = 3\n", encoding="utf-8")
    with pytest.raises(SettingsError, match=r"\[units\] price should be text, got 3"):
        load_config(path)
    path.write_text('[units]\ncurrency = "EUR"\n', encoding="utf-8")
    with pytest.raises(SettingsError, match="unknown key 'currency' in \\[units\\]; expected one of price, volume"):
        load_config(path)


def test_a_curve_far_out_at_a_distant_plan_price_runs_off_the_chart_not_over_the_observations():
    """A plan price far beyond the observed ones sends a high-degree curve to huge volumes: the volume axis
    keeps to the observations (and what is drawn over their prices) with half their span again either side,
    so the observations stay spread over the chart's rows; the legend says the curves run off it."""
    import fitcore
    from tui.widgets.charts import volume_window
    results, _ = fit_source(sample_source())
    far = fitcore.fit_batch(results.data, results.settings, plan_price=np.asarray(results.price_hi) * 1.9)
    names = far.names
    s = next(i for i in range(far.n_series) if names[int(far.chosen[i])] == "poly5")
    rows = slice(far.data.offsets[s], far.data.offsets[s + 1])
    seen = far.data.volume[rows]
    chart = curve_chart(far, s, 70, 16, int(far.chosen[s]), {})
    body, legend = chart.plain.rsplit("\n", 1)
    assert "curves run off the chart" in legend
    ticks = [float(t.replace(",", "")) for t in re.findall(r"^\s*(-?[\d,.]+)┤", body, flags=re.M)]
    span = seen.max() - seen.min()
    assert ticks and min(ticks) >= seen.min() - span and max(ticks) <= seen.max() + span
    # nothing to cut where every drawn volume is near the observed ones (none is beyond half their span)
    assert volume_window([np.array([10.0, 20.0])], [np.array([5.0, 25.0])]) is None
    assert volume_window([np.array([10.0, 20.0])], [np.array([-500.0, 20.0])]) == (5.0, 25.0)



def test_a_plan_price_far_beyond_the_observed_ones_is_not_on_the_price_axis():
    """Prices of 2 to 4 and a plan at 1,000: the axis stayed on the observations and says where the plan is."""
    import fitcore
    from tui.widgets.charts import on_chart
    results, _ = fit_source(sample_source())
    far = fitcore.fit_batch(results.data, results.settings, plan_price=np.asarray(results.price_hi) * 250)
    s = 0
    chart = curve_chart(far, s, 70, 16, int(far.chosen[s]), {})
    body, legend = chart.plain.rsplit("\n", 1)
    ticks = [float(t) for t in re.findall(r"\d+\.\d+", body.splitlines()[-2])]
    assert max(ticks) <= far.price_hi[s] * 1.2 and "off the chart" in legend
    assert on_chart(5.0, 2.0, 4.0) and on_chart(1.0, 2.0, 4.0) and not on_chart(8.1, 2.0, 4.0)
    assert not on_chart(0.9, 2.0, 4.0) and not on_chart(float("nan"), 2.0, 4.0)


@pytest.mark.parametrize("size", [(80, 24), (120, 40)])
async def test_a_notification_under_a_dialog_is_drawn_once(ledger_path, size):
    """A notification shown before a dialog opens, and one raised while it is open, each appear once on
    screen (the band beneath the dialog drew a second copy of the first, cut by the dialog's), and both
    are in the band again when it closes."""
    app = make_app(ledger_path)
    async with app.run_test(size=size, notifications=True) as pilot:
        await started(app, pilot)
        app.notify("zebra", timeout=30)
        await pilot.pause(0.3)
        await pilot.press("n")
        await until(pilot, lambda: f"Note on {app.session.label(app.session.current)}" in screen_text(app))
        app.notify("okapi", timeout=30)
        await pilot.pause(0.3)
        shown = screen_text(app)
        assert shown.count("zebra") == 1 and shown.count("okapi") == 1, shown
        await pilot.press("escape")
        await until(pilot, lambda: "Note on " not in screen_text(app))
        await pilot.pause(0.3)
        shown = screen_text(app)
        assert shown.count("zebra") == 1 and shown.count("okapi") == 1, shown


def straight_lines(path: Path, low: float, step: float, level: float, slope: float, noise: float) -> Path:
    """Three invented straight-line series of 40 rows, prices from ``low`` by ``step``, written to ``path``."""
    rng = np.random.default_rng(1)
    with open(path, "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["product", "price", "volume"])
        for p in range(3):
            for k in range(40):
                price = low + step * ((k * 7) % 40)
                writer.writerow([f"item {p}", f"{price:.2f}", f"{level - slope * price + rng.normal(0, noise):.1f}"])
    return path


def clean_source(tmp_path) -> Source:
    """Three straight-line series that raise no flag: the default view lists nothing."""
    return Source(data=straight_lines(tmp_path / "clean.csv", 2, 0.02, 1000, 150, 5), columns=Columns())


async def test_an_empty_view_says_why_in_the_list_at_80_columns(tmp_path, ledger_path):
    """At 80 columns the evidence panel is off screen: the list itself says nothing needs a decision and
    where the series are, instead of a blank list."""
    app = make_app(ledger_path, clean_source(tmp_path))
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        assert not session.diagnosis.raised.any() and not len(session.view)
        text = screen_text(app)
        assert "Nothing needs a decision: 3 undecided series carry no flag." in text
        assert "f: all 3 series" in text
        session.set_filter("held")
        app.screen.query_one("#series-list").refresh()
        await pilot.pause()
        assert "Nothing listed here: f for another view, / to search." in screen_text(app)
