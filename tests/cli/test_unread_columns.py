"""``pricefold fit`` names the data's columns no role reads.  Without ``--segment`` the rows of a product are one
series whatever a region column says: the sample fitted without it was 60 curves over three regions' rows each,
and nothing said so."""
from __future__ import annotations

from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from pricefold.cli import main

ROOT = Path(__file__).resolve().parents[2]
SAMPLE = ROOT / "sample" / "wholesale.csv"


def notes(capsys, data: Path, out: Path, *options: str) -> list[str]:
    capsys.readouterr()
    assert main(["fit", str(data), *options, "-q", "-o", str(out)]) == 0
    return [line for line in capsys.readouterr().err.splitlines() if line.startswith(f"note: {data}")]


@pytest.mark.parametrize("options, said", [
    ((), ["note: {data}: data columns not used: 'region', 'week', 'promo'; every row of a product is one series "
          "whatever these say (--segment COL splits them)"]),
    (("--segment", "region", "--date", "week"), ["note: {data}: data column not used: 'promo'"]),
    (("--segment", "region", "--date", "week", "--control", "promo"), [])])
def test_the_sample_s_columns_left_unread_are_named(tmp_path, capsys, options, said):
    assert notes(capsys, SAMPLE, tmp_path / "r.json", *options) == [line.format(data=SAMPLE) for line in said]


def test_a_partition_folder_s_column_is_a_data_column(tmp_path, capsys):
    """A folder partitioned by region (``region=East/…``): the region is a column of the data, unread without
    --segment region."""
    folder = tmp_path / "rows"
    for region, shift in (("East", 0.0), ("West", 5.0)):
        (folder / f"region={region}").mkdir(parents=True)
        pq.write_table(pa.table({"product": ["a"] * 4, "price": [1.0, 2.0, 3.0, 4.0],
                                 "volume": [10 + shift, 8 + shift, 6 + shift, 4 + shift]}),
                       folder / f"region={region}" / "part-0.parquet")
    assert notes(capsys, folder, tmp_path / "r.json") == [
        f"note: {folder}: data column not used: 'region'; every row of a product is one series whatever these say "
        "(--segment COL splits them)"]
    assert notes(capsys, folder, tmp_path / "r2.json", "--segment", "region") == []


def test_many_unread_columns_are_counted_past_eight(tmp_path, capsys):
    data = tmp_path / "wide.csv"
    extra = [f"c{i}" for i in range(11)]
    data.write_text(",".join(["product", "price", "volume", *extra, ""]) + "\n"
                    + "".join(f"a,{p},{10 - p}," + ",".join("0" * 11) + ",\n" for p in range(1, 6)), encoding="utf-8")
    [line] = notes(capsys, data, tmp_path / "r.json")
    assert line.startswith(f"note: {data}: data columns not used: 'c0', 'c1', ")
    assert "'c7' and 3 more; every row" in line and "''" not in line  # the trailing delimiter's blank name left out


def test_a_long_unread_name_is_cut_as_the_header_s_error_cuts_it():
    from fitcore.data.columns import Columns
    from fitcore.data.loader import unread_columns_note
    note = unread_columns_note(Path("d.csv"), ("notes " + "x" * 60, "week"), Columns(segments=("region",)))
    assert note == "note: d.csv: data columns not used: 'notes " + "x" * 33 + "…', 'week'"
