"""The list's flags column says what it must at 80 columns: a look-alike's '≈' mark gives way before any stop
flag does, and a stale series' flags, this cycle's proposal's, are said to be of that proposal where the model
listed is the one signed on other data."""
from __future__ import annotations

from fitcore import ledger
from fitcore.data.columns import Columns
from tui.factory import Source

from .conftest import make_app, screen_text, started
from .test_dialog_answers_shown import renamed


async def test_a_look_alikes_mark_leaves_its_stop_flags_whole_at_80_columns(ledger_path, tmp_path):
    """At 80 columns '≈' and the ledger's long spelling took the whole flags column: the row read '…  ≈flat line
    thing …', its '!flat-price' gone (whole at 200 columns).  The mark's name is cut first."""
    name = "table salt from the coast 1 kg"
    ledger.append(ledger_path, [ledger.Entry(series={"product": name, "region": "North"}, action="hold",
                                             fingerprint="f" * 64, results="ab" * 32)], ledger.Identity("bo", "bo", "h"))
    source = Source(data=renamed(tmp_path, name.capitalize(), product="table salt 1 kg"),
                    columns=Columns(segments=("region",), date="week"))
    app = make_app(ledger_path, source)
    async with app.run_test(size=(80, 24)) as pilot:
        await started(app, pilot)
        [row] = [line for line in screen_text(app).splitlines() if line.startswith("· Table salt")]
        assert "≈ta…" in row and "!flat-price +1" in row, row
