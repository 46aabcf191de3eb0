"""``fit --engine dask`` gives the local engine's results, whatever the workers and partitions.

The reference is the local engine (itself checked against outside references elsewhere): the
results tables must agree cell for cell once both are sorted by series and candidate.
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.csv as pacsv
import pyarrow.parquet as pq
import pytest

from fitcore.data.columns import Columns
from fitcore.errors import SettingsError
from fitcore.fit.settings import FitSettings, provenance
from fitcore.results.read import read_results
from fitcore.review.thresholds import Thresholds
from pricefold.cli import main
from tests.bench.invented import invented_arrays

pytest.importorskip("distributed")
SAMPLE = Path(__file__).parents[2] / "sample"


@pytest.fixture(scope="module")
def client():
    from fitcore.scale.dask_engine import connect
    client = connect(None, 2)
    yield client
    from fitcore.scale.dask_engine import disconnect
    disconnect(client)


def canonical(table: pa.Table, keys: list[str]) -> dict:
    """Columns as plain lists, rows sorted by series key and candidate, NaN and null alike."""
    rows = table.to_pylist()
    rows.sort(key=lambda r: (*[r[k] for k in keys], r["candidate"]))

    def plain(v):
        if isinstance(v, float) and math.isnan(v):
            return None
        return [plain(x) for x in v] if isinstance(v, list) else v
    return {name: [plain(r[name]) for r in rows] for name in table.column_names}


def parts_table(folder: Path) -> pa.Table:
    return pa.concat_tables([pq.read_table(p) for p in sorted(folder.glob("part-*.parquet"))],
                            promote_options="permissive")


def assert_same_results(local: Path, folder: Path, keys: list[str]) -> None:
    ours, theirs = pq.read_table(local), parts_table(folder)
    assert theirs.num_rows == ours.num_rows
    assert canonical(theirs, keys) == canonical(ours, keys)
    header = json.loads(pq.read_schema(local).metadata[b"pricefold"])
    header["input"].pop("rejects_file")  # named for the results file locally, rejects.csv in a folder
    for part in folder.glob("part-*.parquet"):
        theirs = json.loads(pq.read_schema(part).metadata[b"pricefold"])
        assert theirs["input"].pop("rejects_file") in (None, "rejects.csv")
        assert theirs == header  # rejects_sha256 included: the same rejected rows, byte for byte


def test_the_sample_gives_the_local_results(tmp_path, client):
    from fitcore.scale.dask_engine import fit_on_dask
    local = tmp_path / "local.parquet"
    assert main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week",
                 "--plan", str(SAMPLE / "plan.csv"), "-o", str(local), "--quiet"]) == 0
    columns = Columns(segments=("region",), date="week")
    settings = FitSettings(extra=provenance(columns.as_dict(), str((SAMPLE / "plan.csv").resolve()), None))
    for partitions in (3, 7):
        out = tmp_path / f"dask-{partitions}"
        total = fit_on_dask(SAMPLE / "wholesale.csv", columns, settings, Thresholds(), out,
                            plan_file=SAMPLE / "plan.csv", client=client, partitions=partitions)
        assert total["series"] == 180 and len(list(out.glob("part-*.parquet"))) == partitions
        assert_same_results(local, out, ["product", "region"])


def test_5000_series_in_7_shuffled_files_give_the_local_results(tmp_path, client):
    """Interleaved input: rows of every series spread over all 7 files, in random order."""
    product, price, volume = invented_arrays(5000, rows_per_series=20, seed=11)
    rng = np.random.default_rng(5)
    order = rng.permutation(len(price))
    folder = tmp_path / "data"
    folder.mkdir()
    names = np.char.add("item-", product.astype(str))[order]
    for i, rows in enumerate(np.array_split(np.arange(len(order)), 7)):
        pq.write_table(pa.table({"product": names[rows], "price": price[order][rows], "volume": volume[order][rows]}),
                       folder / f"f{i}.parquet", row_group_size=9000)
    local = tmp_path / "local.parquet"
    assert main(["fit", str(folder), "-o", str(local), "--quiet", "--plan-price", "150"]) == 0
    out = tmp_path / "dask.parquet"
    assert main(["fit", str(folder), "-o", str(out), "--quiet", "--plan-price", "150", "--engine", "dask",
                 "--scheduler", client.scheduler.address, "--partitions", "7"]) == 0
    assert_same_results(local, out, ["product"])
    summary = json.loads((out / "_summary.json").read_text())
    assert summary["series"] == 5000 and summary["pieces"] > 7 and summary["partitions"] == 7  # row groups a file
    assert len(list(out.glob("part-*.parquet"))) == 7


def test_a_folder_partitioned_by_region_gives_the_local_results(tmp_path, client):
    """The sample written as ``region=East/…`` folders: the region is in the folder names only.  Before, each
    part was checked alone and the run stopped: "expected a column 'region'"."""
    import pandas as pd
    folder = tmp_path / "data"
    pq.write_to_dataset(pa.Table.from_pandas(pd.read_csv(SAMPLE / "wholesale.csv"), preserve_index=False), folder,
                        partition_cols=["region"])
    common = ["--segment", "region", "--date", "week", "--plan", str(SAMPLE / "plan.csv"), "--quiet"]
    local, out = tmp_path / "local.parquet", tmp_path / "dask.parquet"
    assert main(["fit", str(folder), *common, "-o", str(local)]) == 0
    assert main(["fit", str(folder), *common, "-o", str(out), "--engine", "dask",
                 "--scheduler", client.scheduler.address, "--partitions", "3"]) == 0
    assert pq.read_table(local).num_rows == 180 * 7
    assert_same_results(local, out, ["product", "region"])


def test_repeated_rows_across_files_are_rejected_as_locally(tmp_path, client):
    folder = tmp_path / "data"
    folder.mkdir()
    weeks = np.arange("2025-01-06", "2025-06-30", 7, dtype="datetime64[D]")
    first = pa.table({"product": ["a"] * len(weeks), "week": weeks.astype(str), "price": np.linspace(1, 2, len(weeks)),
                      "volume": np.linspace(90, 50, len(weeks))})
    pq.write_table(first, folder / "f0.parquet")
    pq.write_table(first.slice(3, 2), folder / "f1.parquet")  # two weeks again, in another file
    local, out = tmp_path / "local.parquet", tmp_path / "dask"
    assert main(["fit", str(folder), "--date", "week", "-o", str(local), "--quiet"]) == 0
    assert main(["fit", str(folder), "--date", "week", "-o", str(out), "--quiet", "--engine", "dask",
                 "--scheduler", client.scheduler.address]) == 0
    assert_same_results(local, out, ["product"])
    local_rejects = (tmp_path / "local.rejects.csv").read_text()
    assert (out / "rejects.csv").read_text() == local_rejects
    assert "duplicate of line 4" in local_rejects


def test_show_reads_a_results_folder(tmp_path, client, capsys):
    out = tmp_path / "dask"
    assert main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "-o", str(out), "--quiet",
                 "--engine", "dask", "--scheduler", client.scheduler.address]) == 0
    head, series = read_results(out)
    assert len(series) == 180 and head["input"]["rows"] == 18625
    capsys.readouterr()
    assert main(["show", str(out), "--product", "lemons 500 g"]) == 0
    assert "lemons 500 g · East" in capsys.readouterr().out


def test_ledger_signs_off_and_exports_a_results_folder(tmp_path, client):
    import csv
    out, ledger_path, export = tmp_path / "dask", tmp_path / "ledger.jsonl", tmp_path / "export.csv"
    assert main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "-o", str(out), "--quiet",
                 "--engine", "dask", "--scheduler", client.scheduler.address]) == 0
    _, series = read_results(out)
    unflagged = sum(1 for record in series if not record["flags"] and record["chosen"])
    assert main(["ledger", "accept-unflagged", str(out), "--ledger", str(ledger_path), "--analyst", "ana"]) == 0
    assert len(ledger_path.read_text().splitlines()) == unflagged
    assert main(["ledger", "export", str(ledger_path), "--results", str(out), "-o", str(export)]) == 0
    rows = list(csv.DictReader(export.open()))
    assert len(rows) == 180 and sum(row["status"] == "accepted" for row in rows) == unflagged


def test_no_usable_row_is_the_same_one_line_error_as_locally(tmp_path, client, capsys):
    data = tmp_path / "bad.csv"
    data.write_text("product,price,volume\na,-1,5\nb,x,7\n")
    errors = []
    for extra in ([], ["--engine", "dask", "--scheduler", client.scheduler.address]):
        assert main(["fit", str(data), "-o", str(tmp_path / "out.parquet"), "--quiet", *extra]) == 2
        errors.append(capsys.readouterr().err.strip())
    assert errors[0] == errors[1] and "no usable rows" in errors[0] and "\n" not in errors[0]


def test_a_failed_run_leaves_the_earlier_results_whole(tmp_path, client, capsys):
    out = tmp_path / "dask"
    common = ["--segment", "region", "-o", str(out), "--quiet", "--engine", "dask", "--scheduler",
              client.scheduler.address]
    assert main(["fit", str(SAMPLE / "wholesale.csv"), *common]) == 0
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    plan = tmp_path / "plan.csv"
    plan.write_text("product,region,plan_price\napples 1 kg,North,-2\n")  # fails inside the workers
    assert main(["fit", str(SAMPLE / "wholesale.csv"), "--plan", str(plan), *common]) == 2
    assert "expected a price above zero" in capsys.readouterr().err
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["dask", "plan.csv"]  # no staging folder left


def test_dask_missing_is_one_line_telling_what_to_install(monkeypatch):
    import sys

    from fitcore.scale.dask_engine import connect
    monkeypatch.setitem(sys.modules, "distributed", None)
    with pytest.raises(SettingsError, match=r"pip install 'pricefold\[scale\]'"):
        connect(None, 1)


def test_controls_and_season_give_the_local_results(tmp_path, client):
    """With controls the partitions agree with the local engine too, and a column is 0/1 only if it is so in
    every partition: here ``display`` is 0/1 except in one series, so no partition treats it as 0/1 (its plan
    default is each series' mean, not 0)."""
    rng = np.random.default_rng(8)
    product, price, volume = invented_arrays(60, rows_per_series=30, seed=12)
    display = (rng.random(len(price)) < 0.3).astype(float)
    display[product == 7] = np.where(display[product == 7] > 0, 2.0, 0.0)
    weeks = (np.datetime64("2024-01-01") + (np.tile(np.arange(30), 60) * 7).astype("timedelta64[D]")).astype(str)
    data = tmp_path / "d.csv"
    pacsv.write_csv(pa.table({"product": np.char.add("item-", product.astype(str)), "week": weeks, "price": price,
                               "volume": volume, "display": display}), data)
    options = ["--date", "week", "--control", "display", "--season", "1", "--plan-price", "150", "--quiet"]
    local, out = tmp_path / "local.parquet", tmp_path / "dask"
    assert main(["fit", str(data), "-o", str(local), *options]) == 0
    assert main(["fit", str(data), "-o", str(out), *options, "--engine", "dask", "--scheduler",
                 client.scheduler.address, "--partitions", "7"]) == 0
    assert_same_results(local, out, ["product"])
    header = json.loads(pq.read_schema(local).metadata[b"pricefold"])
    assert header["settings"]["controls"]["binary"] == []
    _, series = read_results(local)
    means = {s["key"]["product"]: s["control_values"]["display"] for s in series}
    assert len(set(means.values())) > 10  # each series' own mean
