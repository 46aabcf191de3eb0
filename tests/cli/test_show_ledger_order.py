"""``show --ledger`` lists series in the screen's order: a series whose data changed since its sign-off counts
its ``stale`` as one stop flag more, as the screen raises it.  Before, ``show`` ranked by the results' flags alone
and listed such a series among the unflagged ones, after series the screen put below it (a trial: truffle oil ·
South, stale and rising, came second in ``show`` and first on the screen).  The shipped sample results; a hold
recorded on other data makes one unflagged series stale."""
from __future__ import annotations

import hashlib
from pathlib import Path

import pyarrow.parquet as pq

from fitcore import ledger
from fitcore.results.read import read_header
from fitcore.review.flags import SEVERITY
from pricefold.cli import main

RESULTS = Path(__file__).resolve().parents[2] / "sample" / "results.parquet"


def test_a_stale_series_is_listed_among_those_with_a_stop_flag(tmp_path, capsys):
    import json
    rows = [r for r in pq.read_table(RESULTS).to_pylist() if r["is_chosen"]]
    unflagged = max((r for r in rows if r["flags"] == "[]"), key=lambda r: r["score"])  # listed last of all before
    book = tmp_path / "L.jsonl"
    other_data = hashlib.sha256(b"rows these results do not hold").hexdigest()
    ledger.append(book, [ledger.Entry(series={"product": unflagged["product"], "region": unflagged["region"]},
                                      action="hold", fingerprint=other_data,
                                      results=ledger.results_digest(read_header(RESULTS)), note="look again")],
                  ledger.Identity("ana", "ana", "h"))
    capsys.readouterr()
    assert main(["show", str(RESULTS), "--ledger", str(book)]) == 0
    lines = capsys.readouterr().out.splitlines()[1:]
    label = f"{unflagged['product']} · {unflagged['region']}"
    at = next(i for i, line in enumerate(lines) if line.startswith(label))
    assert " stale " in lines[at]
    stops = {(r["product"], r["region"]): sum(SEVERITY[f["code"]] == "stop" for f in json.loads(r["flags"]))
             for r in rows}
    without = [i for i, line in enumerate(lines) for (product, region), n in stops.items()
               if n == 0 and f"{product} · {region}" != label and line.startswith(f"{product} · {region} ")]
    assert len(without) > 100 and at < min(without)  # before every series with no stop flag, as on the screen
