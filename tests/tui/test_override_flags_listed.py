"""The screen's "all series" list gives a series an override stands on its own curve's flags (as ``ledger
export`` writes them), not the proposal's; a series accepted as proposed keeps the results' flags.

The series, their fits and the ledger are ``tests/cli/test_export_override_flags.py``'s (``run``), where which
overriding curves rise or go below zero is checked apart from pricefold with numpy's ``Polynomial``.
"""
from __future__ import annotations

import pytest

from fitcore.results.source import source_from_results
from tests.cli.test_export_override_flags import _codes, _rows, run  # noqa: F401 (a fixture)
from tests.tui.conftest import make_app, screen_text, started


def on_a_copy(run, tmp_path):
    """The screen on the run's Parquet results and a copy of its ledger (decisions made here stay here)."""
    copy = tmp_path / "ledger.jsonl"
    copy.write_bytes(run.book.read_bytes())
    return make_app(copy, source_from_results(run.parquet))


@pytest.mark.parametrize("kind", ["parquet", "json"])
async def test_an_overrides_row_lists_its_own_curves_flags(run, tmp_path, kind):
    copy = tmp_path / "ledger.jsonl"
    copy.write_bytes(run.book.read_bytes())
    if kind == "json":  # fitted again from the results' data (the session's own Results)
        import json
        path = tmp_path / "results.json"
        path.write_text(json.dumps(run.document))
    else:
        path = run.parquet
    app = make_app(copy, source_from_results(path))
    exported = _rows(run.exported["parquet"])
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        session.set_filter("all", None)
        app.screen.refresh_all()
        await pilot.pause(0.3)
        for name, (record, model) in run.cases.items():
            product = record["key"]["product"]
            session.bring(int(session.keys.indices_of([record["key"]])[0]))
            app.screen.refresh_all()
            await pilot.pause(0.2)
            row = next(line for line in screen_text(app).splitlines() if f" {product} " in line and "↺" in line)
            shown = [word[1:] for word in row.split() if word[:1] in "!?" and len(word) > 1]
            assert f" {model} " in row, (name, row)
            assert sorted(shown) == sorted(exported[product]["flags"].split()), (name, row)
        record, _ = run.cases["proposal rises"]
        assert "rising" in _codes(record)  # the proposal's flag, not the override's
        accepted = next(r for r in run.document["series"] if r["key"]["product"] not in
                        {c[0]["key"]["product"] for c in run.cases.values()} and _codes(r))
        s = int(session.keys.indices_of([accepted["key"]])[0])
        assert session.listed_flags(s) == session.flag_codes(s)  # not an override: the results' flags


async def test_the_flag_filter_and_its_counts_go_by_the_flags_the_rows_show(run, tmp_path):
    """'⚑ rising' listed an override to a flat curve (its row showing no flag) by the proposal's rising, and left
    out an override whose own curve goes below zero from '⚑ below-zero' (a trial); show --ledger --flag went by
    the rows' flags.  The filter and its menu's counts now go by what the rows show."""
    app = on_a_copy(run, tmp_path)
    exported = _rows(run.exported["parquet"])
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        for code in ("rising", "below-zero"):
            session.set_filter("all", code)
            listed = {session.results.data.key_of(s)["product"] for s in session.view.tolist()}
            expected = {product for product, row in exported.items() if code in row["flags"].split()}
            assert listed == expected, code
            assert session.filter_counts()[f"flag:{code}"] == len(expected)
        overrides = {record["key"]["product"] for record, _ in run.cases.values()}
        assert any(code in _codes(record) and record["key"]["product"] not in
                   {p for p, row in exported.items() if code in row["flags"].split()}
                   for record, _ in run.cases.values() for code in ("rising", "below-zero"))  # a case that differs
        assert overrides
