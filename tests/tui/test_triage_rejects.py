"""``triage DATA`` fits the data itself: the rows its fit rejects are said on the header and listed under ``?``
(trials found them lost without a word: no rejects file, no results file, nothing on screen)."""
from __future__ import annotations

from datetime import date, timedelta

import numpy as np

from fitcore.data.columns import Columns
from tests.tui.conftest import make_app, screen_text, started, until
from tui.factory import Source

BAD = [("zorbel tea", "Store A", "2025-12-01", "-1", "100"), ("zorbel tea", "Store A", "2025-12-08", "2.5", "abc"),
       ("zorbel tea", "Store A", "2025-12-15", "", "100"), ("zorbel tea", "Store A", "2025-01-06", "2.5", "100")]


def write_shop(path) -> None:
    rng = np.random.default_rng(3)
    lines = ["item;store;day;unit_price;qty"]
    for item in ("zorbel tea", "quill jam"):
        for store in ("Store A", "Store B"):
            for w in range(30):
                price = 4 + rng.random()
                day = date(2025, 1, 6) + timedelta(weeks=w)
                lines.append(f"{item};{store};{day};{price:.2f};{900 - 100 * price + rng.normal(0, 5):.0f}")
    lines += [";".join(row) for row in BAD]
    path.write_text("\n".join(lines) + "\n")


async def test_the_rows_a_triage_fit_rejects_are_on_the_header_and_each_under_help(tmp_path, ledger_path):
    data = tmp_path / "shop.csv"
    write_shop(data)
    source = Source(data=data, columns=Columns(product="item", segments=("store",), price="unit_price", volume="qty",
                                               date="day"))
    app = make_app(ledger_path, source)
    async with app.run_test(size=(100, 30)) as pilot:
        await started(app, pilot)
        header = screen_text(app).splitlines()[:4]
        said = [line for line in header if "rows rejected" in line]
        assert said and "shop.csv: 4 rows rejected (not fitted; each under ?): 1 negative" in said[0], header
        await pilot.press("question_mark")
        await until(pilot, lambda: "Keys" in screen_text(app))
        for _ in range(12):
            await pilot.press("pagedown")
        await pilot.pause()
        text = " ".join(screen_text(app).split())
        assert "Rejected rows of" in text and "this screen writes no rejects file" in text
        for line, why in ((122, "negative unit_price"), (123, "non-numeric qty"), (124, "missing unit_price"),
                          (125, "duplicate of line")):
            assert f"line {line}: {why}" in text, (line, text)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["shop.csv"]  # nothing written beside the data
