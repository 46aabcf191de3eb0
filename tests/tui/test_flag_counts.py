"""The list's flags column counts only the flags it does not show: a first flag shown cut counts as shown."""
from __future__ import annotations

import pytest
from rich.cells import cell_len

from tests.tui.conftest import make_app, screen_text, started
from tui.cells import key_label
from tui.widgets.series_list import short_flags


@pytest.mark.parametrize("codes", [["outside-range", "near-tie"], ["influential-point"],
                                   ["below-zero", "outside-range", "near-tie"], ["weak-fit"]])
@pytest.mark.parametrize("width", range(6, 48))
def test_the_count_is_of_the_flags_not_shown(codes, width):
    text = short_flags(codes, width)
    assert cell_len(text) <= width
    words = text.split()
    counted = int(words[-1][1:]) if words and words[-1].startswith("+") else 0
    shown = [w for w in words if not w.startswith("+")]
    assert len(shown) + counted == len(codes), text  # every flag either shown (whole or cut) or counted
    assert shown[0][1:].rstrip("…") and codes[0].startswith(shown[0][1:].rstrip("…"))  # the first, maybe cut


@pytest.mark.parametrize("label", ["dried apricots 500 g · East", "fresh figs 500 g · South"])
async def test_the_list_counts_the_flags_a_series_has(ledger_path, label):
    app = make_app(ledger_path)
    async with app.run_test(size=(120, 40)) as pilot:
        session = await started(app, pilot)
        s = next(int(i) for i in session.view if session.label(int(i)) == label)
        n_flags = len(session.flag_codes(s))
        listed = app.screen.series_list
        key_w, flags_w = listed.columns(listed.scrollable_content_region.width)
        row = next(line for line in screen_text(app).splitlines()
                   if line[2:].startswith(key_label(session.label_parts(s), key_w)))
        flags = row.split("▕")[0][-flags_w - 1:].split()
        counted = int(flags[-1][1:]) if flags[-1].startswith("+") else 0
        assert len([f for f in flags if not f.startswith("+")]) + counted == n_flags, row
