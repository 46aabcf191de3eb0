"""A triage session opened on a ledger naming many series: every status as each series' history gives it.

On opening, the statuses of all the series a ledger names are set at once (``ledger_series.set_statuses``) and the
series found through a table of key values (``ledger_series.KeyTable``); the reference is the ledger's own replay
(``fitcore.ledger.replay``) asked series by series, and ``SeriesKeys.indices_of`` (Arrow's join).
"""
from __future__ import annotations

import json

import pyarrow.parquet as pq

from fitcore import ledger
from fitcore.ledger.replay import replay, series_id
from pricefold.cli import main
from tests.tui.conftest import ANA
from tests.tui.test_stored_results import fit_to_parquet
from tui.factory import open_stored_session


def test_opening_on_a_ledger_of_many_series_gives_each_its_history_status(tmp_path):
    _, out = fit_to_parquet(tmp_path)
    path = tmp_path / "ledger.jsonl"
    assert main(["ledger", "accept-unflagged", str(out), "--ledger", str(path), "-q"]) == 0
    records = [json.loads(line) for line in path.read_bytes().splitlines()]
    assert len(records) > 64  # the bulk path, not the one-by-one one
    keys = [r["series"] for r in records]
    # one series' data changed since (stale), one held, and a series these results do not hold
    ledger.append(path, [ledger.Entry(series=keys[0], action="accept", fingerprint="0" * 64, results="r",
                                      model="poly1", proposed="poly1", supersedes=records[0]["digest"]),
                         ledger.Entry(series=keys[1], action="hold", fingerprint=records[1]["fingerprint"],
                                      results="r", supersedes=records[1]["digest"]),
                         ledger.Entry(series={"product": "not in these results"}, action="hold", fingerprint="f",
                                      results="r")], ANA)
    session = open_stored_session(out, path, ANA)
    histories = replay(ledger.Ledger(path).records)
    table = pq.read_table(out)
    names, n_c = session.keys.names, len(session.results.names)
    statuses = []
    for s in range(session.results.n_series):
        key = {name: table.column(name)[s * n_c].as_py() for name in names}
        history = histories.get(series_id(key))
        statuses.append(history.status(table.column("fingerprint")[s * n_c].as_py()) if history else "pending")
    assert session.status.tolist() == statuses
    assert {"stale", "held", "accepted", "pending"} <= set(statuses)
    wanted = keys[:40] + [{"product": "not in these results"}]
    assert session._key_table.indices_of(wanted) == session.keys.indices_of(wanted).tolist()
