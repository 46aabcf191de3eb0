"""The statuses and key lookups a session makes on opening, many series at once (``tui.ledger_series``),
against the ledger's own answer series by series (``fitcore.ledger.replay.SeriesHistory.status``) and
``SeriesKeys.indices_of`` (Arrow's join): every kind of standing decision, carries, revokes, stale data,
a missing fingerprint, repeated keys and keys of two columns."""
from __future__ import annotations

import numpy as np
import pyarrow as pa

from fitcore.data.keys import SeriesKeys
from fitcore.ledger.replay import replay, series_id
from tui.ledger_series import CODE, KeyTable, fingerprint_reader, set_statuses


class Prints:
    """A dataset's fingerprints as a session's ``data`` gives them (a list: the bulk path)."""

    def __init__(self, prints: list) -> None:
        self.fingerprints = prints

    def fingerprint_of(self, s: int):
        return self.fingerprints[s]


def record(n: int, series: dict, action: str, fingerprint: str = "fp", **more) -> dict:
    return {"seq": n, "series": series, "action": action, "fingerprint": fingerprint, "analyst": "ana",
            "digest": f"d{n}", **more}


def histories_of_every_kind(n_series: int):
    """Records on ``n_series`` series cycling through the kinds of history; the fingerprints the results hold."""
    records, prints = [], []
    for s in range(n_series):
        key, kind, n = {"product": f"p{s}"}, s % 9, 10 * s
        prints.append(None if kind == 8 else "fp")
        if kind == 0:
            continue  # no record: pending
        if kind == 1:
            records.append(record(n, key, "accept"))
        elif kind == 2:
            records.append(record(n, key, "override", model="poly2"))
        elif kind == 3:
            records.append(record(n, key, "hold"))
        elif kind == 4:
            records.append(record(n, key, "accept", fingerprint="older"))  # the data changed since: stale
        elif kind == 5:  # an override carried to new data: overridden
            records += [record(n, key, "override", fingerprint="older", model="poly2"),
                        record(n + 1, key, "carry", carries=f"d{n}")]
        elif kind == 6:  # accepted, then revoked: pending again
            records += [record(n, key, "accept"), record(n + 1, key, "revoke")]
        elif kind == 7:  # a note changes nothing
            records += [record(n, key, "hold"), record(n + 1, key, "note")]
        else:  # no fingerprint to compare with: the decision stands as recorded
            records.append(record(n, key, "accept", fingerprint="other"))
    return replay(records), prints


def test_bulk_statuses_are_each_series_history_status():
    histories, prints = histories_of_every_kind(300)
    changed = {s: series_id({"product": f"p{s}"}) for s in range(300)}
    status, codes = np.array(["pending"] * 300, dtype=object), np.zeros(300, np.int8)
    set_statuses(status, codes, changed, histories, fingerprint_reader(Prints(prints), len(changed)))
    expected = [histories[sid].status(prints[s]) if sid in histories else "pending" for s, sid in changed.items()]
    assert status.tolist() == expected
    assert codes.tolist() == [CODE[word] for word in expected]
    assert {"pending", "accepted", "overridden", "held", "stale"} <= set(expected)
    assert expected[5] == "overridden" and expected[6] == "pending" and expected[8] == "accepted"


def test_key_table_finds_what_the_join_finds():
    rng = np.random.default_rng(3)
    products = [f"item {i % 700}" for i in range(1000)]  # repeated keys: the first series wins
    regions = [str(rng.integers(3)) for _ in range(1000)]
    asked = [{"product": f"item {i}", "region": str(i % 3)} for i in range(0, 900, 7)]
    asked += [{"product": "item 1"}, {"region": "1"}, {"product": "item 2", "region": "2", "extra": "x"}]
    for columns in ({"product": products}, {"product": products, "region": regions}):
        keys = SeriesKeys(tuple(columns), {k: pa.array(v) for k, v in columns.items()})
        assert len(asked) > 32  # the table, not the scan
        found = KeyTable(keys).indices_of(asked)
        assert found == keys.indices_of(asked).tolist()
        assert -1 in found and max(found) >= 0


def test_a_key_of_other_columns_finds_no_series():
    """A ledger keyed by product and region, results keyed by product: no record names one of their series (before:
    the table looked up the product alone, and every region's decisions landed on the product's one series)."""
    products = [f"item {i}" for i in range(100)]
    keys = SeriesKeys(("product",), {"product": pa.array(products)})
    asked = [{"product": f"item {i}", "region": "North"} for i in range(40)] + [{"product": "item 3"}]
    assert KeyTable(keys).indices_of(asked) == [-1] * 40 + [3]
