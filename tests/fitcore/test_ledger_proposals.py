"""``accept-unflagged``'s column reader (``fitcore.ledger.proposals``) against the record reader it replaces.

The reference is the record reader (``fitcore.results.read`` through ``snapshot.from_records``), which
``accept-unflagged`` used before: the same results must give the same series, keys, fingerprints,
proposals and signed snapshots, value for value, and a file the column reader does not vouch for must
be refused by the record reader with its own message.
"""
from __future__ import annotations

import json
from datetime import datetime, timezone
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from fitcore import ledger
from fitcore.errors import DataError
from fitcore.ledger import proposals
from fitcore.results.read import RUN_SUMMARY
from pricefold.cli import main

SAMPLE = Path(__file__).parents[2] / "sample"
WHO = ledger.Identity("ana", "ana", "server-1")


@pytest.fixture(scope="module")
def results(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("proposals") / "results.parquet"
    assert main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week",
                 "--plan", str(SAMPLE / "plan.csv"), "-o", str(path), "--quiet"]) == 0
    return path


def test_the_column_reader_signs_what_the_record_reader_signs(results):
    header, columnwise = proposals._columnwise(results, [results])
    reference_header, reference = proposals._by_records(results)
    assert header == reference_header
    assert 0 < len(columnwise) == len(reference)
    assert any(snapshot["plan"] is not None for *_, snapshot in columnwise)  # a plan price was given
    for mine, theirs in zip(columnwise, reference):
        assert mine == theirs
        assert json.dumps(mine, sort_keys=True) == json.dumps(theirs, sort_keys=True)  # floats to the last bit


def test_a_results_folder_is_read_part_by_part_as_the_record_reader_reads_it(results, tmp_path):
    table = pq.read_table(results)
    n_c = len(set(table.column("candidate").to_pylist()))
    cut = (table.num_rows // n_c // 2) * n_c  # at a series' first row
    folder = tmp_path / "out"
    folder.mkdir()
    for i, part in enumerate((table.slice(0, cut), table.slice(cut))):
        pq.write_table(part, folder / f"part-{i:04d}.parquet")
    (folder / RUN_SUMMARY).write_text("{}")
    header, columnwise = proposals._columnwise(folder, proposals.result_parts(folder))
    assert (header, columnwise) == proposals._by_records(folder)
    assert columnwise == proposals.unflagged(results)[1]


def _rewritten(source: Path, target: Path, name: str, change) -> Path:
    """``source`` with column ``name`` replaced by ``change(values)`` (a list), metadata kept."""
    table = pq.read_table(source)
    values = change(table.column(name).to_pylist())
    field = table.schema.field(name)
    column = pa.array(values, type=field.type.value_type if pa.types.is_dictionary(field.type) else field.type)
    table = table.set_column(table.schema.get_field_index(name), pa.field(name, column.type), column)
    pq.write_table(table, target)
    return target


def _first_series_rows(values: list, new) -> list:
    return [new] * 7 + values[7:]


@pytest.mark.parametrize("name, change", [
    ("flags", lambda v: _first_series_rows(v, "not json")),
    ("flags", lambda v: _first_series_rows(v, '[{"code": "x", "severity": "bad", "message": ""}]')),
    ("chosen", lambda v: _first_series_rows(v, "poly9")),
    ("fingerprint", lambda v: _first_series_rows(v, None)),
    ("n", lambda v: _first_series_rows(v, -3)),
])
def test_a_file_the_column_reader_doubts_is_refused_by_the_record_reader(results, tmp_path, name, change):
    damaged = _rewritten(results, tmp_path / "damaged.parquet", name, change)
    assert proposals._columnwise(damaged, [damaged]) is None
    with pytest.raises(DataError) as reference:
        proposals._by_records(damaged)
    with pytest.raises(DataError) as ours:
        proposals.unflagged(damaged)
    assert str(ours.value) == str(reference.value)


def test_accept_unflagged_writes_the_records_the_record_reader_gives(results, tmp_path):
    """The command's ledger against one written through the ledger's API from the record reader: equal
    field by field but for the time, the chain and the batch id; each verifies."""
    header, reference = proposals._by_records(results)
    digest = ledger.results_digest(header)
    by_api = tmp_path / "api.jsonl"
    ledger.append(by_api, [ledger.Entry(series=key, action="accept", fingerprint=fingerprint, results=digest,
                                        model=chosen, proposed=chosen, signed=snapshot)
                           for key, fingerprint, chosen, snapshot in reference], WHO,
                  now=lambda: datetime(2026, 12, 3, tzinfo=timezone.utc))
    by_command = tmp_path / "command.jsonl"
    assert main(["ledger", "accept-unflagged", str(results), "--ledger", str(by_command), "--analyst", "ana",
                 "-q"]) == 0

    def comparable(line: bytes) -> dict:
        record = json.loads(line)
        for varying in ("at", "digest", "prev", "os_user", "host"):
            record.pop(varying)
        record["batch"].pop("id")
        return record
    ours, theirs = by_command.read_bytes().splitlines(), by_api.read_bytes().splitlines()
    assert len(ours) == len(theirs) == len(reference)
    assert [comparable(a) for a in ours] == [comparable(b) for b in theirs]
    assert ledger.verify(by_command) == [] and ledger.verify(by_api) == []
