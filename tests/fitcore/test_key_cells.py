"""A key cell in the data: empty or null is a rejected row ("empty product"), never the text 'nan' or 'None';
text that some readers take for a missing value ('NA', 'nan', 'null', 'None', 'N/A') is a name, kept as written.
Each reader is tried: pyarrow's CSV reader, the line-by-line reader (a quote in the file), Parquet."""
from __future__ import annotations

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from fitcore.data.loader import Columns, load_with_rejects

NAMES = ["NA", "nan", "null", "None", "N/A", "NULL", "#N/A"]
COLUMNS = Columns(segments=("region",))


def kept_and_rejected(path):
    data, rejects = load_with_rejects(path, COLUMNS)
    kept = sorted(zip(data.keys["product"].tolist(), data.keys["region"].tolist()))
    return kept, dict(zip(rejects.lines.tolist(), rejects.reasons))


@pytest.mark.parametrize("quoted", [False, True])
def test_csv_keys(tmp_path, quoted):
    rows = [f"{name},North,1.5,10" for name in NAMES] + [",North,1.5,10", "apples,,1.5,10", "  ,South,1.5,10"]
    if quoted:
        rows.append('"pears, loose",North,1.5,10')  # the line-by-line reader
    path = tmp_path / "d.csv"
    path.write_text("product,region,price,volume\n" + "\n".join(rows) + "\n", encoding="utf-8")
    kept, rejected = kept_and_rejected(path)
    assert kept == sorted([(name, "North") for name in NAMES] + ([("pears, loose", "North")] if quoted else []))
    first = len(NAMES) + 2
    assert rejected == {first: "empty product", first + 1: "empty region", first + 2: "empty product"}


def test_parquet_keys(tmp_path):
    """A null text and a NaN in a column of numbers are missing cells.  Before: the NaN was the product 'nan'."""
    path = tmp_path / "d.parquet"
    products = pa.array([*NAMES, None, "apples"])
    regions = pa.array([1.0] * len(NAMES) + [1.0, float("nan")])  # NaN, not null: as pyarrow writes it
    pq.write_table(pa.table({"product": products, "region": regions,
                             "price": [1.5] * len(products), "volume": [10.0] * len(products)}), path)
    kept, rejected = kept_and_rejected(path)
    assert kept == sorted((name, "1") for name in NAMES)
    assert rejected == {len(NAMES) + 1: "empty product", len(NAMES) + 2: "empty region"}
