"""A screen that fitted the data backtests signed curves against its ledger once; a decision another analyst makes
afterwards on other data (an accept on last cycle's rows, a carry revoked) used to find no backtest there ("a new
look (no backtest here)").  Now the screen tests it when it lands: what is due equals what a screen opened after it
says."""
from __future__ import annotations

from fitcore.data.columns import Columns
from fitcore.fit.settings import FitSettings
from pricefold.cli import main
from tests.cli.test_changed_since_fit import record_number
from tests.cli.test_cycle import fit, write_weeks
from tests.tui.conftest import ANA
from tui.factory import Source, open_session


def test_a_decision_on_other_data_after_the_screen_opened_is_backtested_as_a_new_screen_would(tmp_path):
    book = tmp_path / "ledger.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    first = fit(tmp_path / "c1.csv", tmp_path / "r1.json")
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    product = sorted(first)[0]
    assert main(["ledger", "revoke", str(book), "--record", str(record_number(book, product)), "--note", "x",
                 "-q"]) == 0
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    source = Source(data=tmp_path / "c2.csv", columns=Columns(date="week"),
                    settings=FitSettings(degrees=(0, 1), loglog=False), plan_price=2.3)
    session = open_session(source, book, ANA)
    s = int(session.keys.indices_of([{"product": product}])[0])
    assert session.status[s] == "pending"
    # another analyst accepts it again on last cycle's rows (its signed snapshot recorded) after the screen opened
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    session.reload_ledger()
    fresh = open_session(source, book, ANA)
    assert session.status[s] == fresh.status[s] == "stale"
    assert fresh.due(s) == "backtest passed"
    assert session.due(s) == fresh.due(s)
    assert session.diagnosis.flagged("shifted")[s] == fresh.diagnosis.flagged("shifted")[s]
