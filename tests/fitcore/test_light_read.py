"""Triage reads the observations behind its list and fits the series around the cursor first: that read and
that fit import neither pandas (0.4 s) nor ``pyarrow.compute`` (0.13 s), and give what pandas gave.

References: pandas' ``hash_pandas_object`` (the series' key hashes that seed each fold shuffle) and a
``pandas.Categorical`` of the key texts (what the readers made of a key column before)."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from fitcore.data.cells import categorical
from fitcore.data.dataset import FEW_ROWS, hash_keys

ROOT = Path(__file__).resolve().parents[2]
ALPHABET = list("abcXYZ 0123-_.,éüß咖啡🍋\t") + [""]


def random_texts(rng, n: int) -> np.ndarray:
    return np.array(["".join(rng.choice(ALPHABET, rng.integers(0, 40))) for _ in range(n)], dtype=object)


@pytest.mark.parametrize("n_columns", [1, 2, 3])
def test_few_key_hashes_are_pandas_hashes(n_columns):
    rng = np.random.default_rng(n_columns)
    keys = {f"k{i}": random_texts(rng, 700) for i in range(n_columns)}
    keys["k0"][:3] = ["", "x" * 8, "y" * 16]  # SipHash's tail: empty, one whole block, two
    reference = pd.util.hash_pandas_object(pd.DataFrame({n: v.astype(str) for n, v in keys.items()}),
                                           index=False).to_numpy(np.uint64)
    assert len(keys["k0"]) <= FEW_ROWS
    np.testing.assert_array_equal(hash_keys(keys), reference)


@pytest.mark.parametrize("indices, dictionary", [
    ([[0, 1, 0], [1, 0]], [["a", "b"], ["c", "a"]]),
    ([[0, 2, 1, 3]], [["süd", "b", "süd", "咖啡"]]),  # a dictionary repeating a value
    ([[0, None, 1], []], [["b", " "], []]),  # a null, an empty block
])
def test_key_codes_hold_what_the_categorical_held(indices, dictionary):
    chunks = [pa.DictionaryArray.from_arrays(pa.array(i, pa.int32()), pa.array(d, pa.string()))
              for i, d in zip(indices, dictionary)]
    column = pa.chunked_array(chunks)
    decoded = column.cast(pa.string()).to_pylist()
    reference = pd.Categorical(decoded)  # codes sorted by text; compare texts row by row and the categories' set
    found = categorical(column)
    assert [None if code < 0 else found.categories[code] for code in found.codes] == decoded
    assert sorted(found.categories) == sorted(reference.categories) and len(set(found.categories)) == len(found.categories)
    as_pandas = found.categorical()
    assert [None if v != v else v for v in np.asarray(as_pandas, dtype=object)] == decoded
    assert [None if v != v else v for v in np.asarray(found, dtype=object)] == decoded


READ_AND_FIT_FIRST = r'''
import json, sys
from pathlib import Path
sys.path.insert(0, {root!r})
from fitcore.results.source import source_from_results, read_source
from tui.app import series_in
reading = read_source(source_from_results(Path({results!r}), check_data=False))
wanted = [{{"product": str(reading.data.keys["product"][s])}} for s in (7, 3, 11)]
found = series_in(reading.data, wanted + [{{"product": "no such item"}}])
results, diagnosis = reading.fit(series=sorted(found[:3]))
print(json.dumps([sorted(m for m in ("pandas", "pyarrow.compute") if m in sys.modules), found,
                  results.chosen.tolist(), results.cv_mse.tolist(), results.data.key_hash.tolist()]))
'''


@pytest.mark.slow
def test_reading_the_data_and_fitting_the_first_series_import_neither_pandas_nor_arrow_compute(tmp_path):
    """The triage's read behind its list (a Parquet data file of several row groups) and the first series'
    fit: the same numbers as the whole fit with pandas loaded, and neither module imported on the way."""
    from tests.conftest import random_dataset
    data = random_dataset(51, n_series=40, n_range=(8, 30))
    product = np.repeat(np.array([f"item {s}" for s in range(40)], dtype=object), data.counts)
    pq.write_table(pa.table({"product": product.astype(str), "price": data.price, "volume": data.volume}),
                   tmp_path / "data.parquet", row_group_size=150)  # row groups, each with its own dictionary
    out = subprocess.run([sys.executable, "-m", "pricefold", "fit", str(tmp_path / "data.parquet"), "-o",
                          str(tmp_path / "r.parquet"), "-q"], cwd=ROOT, capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    script = READ_AND_FIT_FIRST.format(root=str(ROOT), results=str(tmp_path / "r.parquet"))
    run = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, cwd=tmp_path)
    assert run.returncode == 0, run.stderr[-2000:]
    imported, found, chosen, cv_mse, hashes = json.loads(run.stdout)
    assert imported == [] and found == [7, 3, 11, -1]
    from fitcore.results.source import read_source, source_from_results
    whole = read_source(source_from_results(tmp_path / "r.parquet", check_data=False))  # pandas loaded here
    results, _ = whole.fit()
    np.testing.assert_array_equal(np.array(chosen), results.chosen[[3, 7, 11]])
    np.testing.assert_array_equal(np.array(cv_mse, dtype=float), results.cv_mse[[3, 7, 11]])
    reference = pd.util.hash_pandas_object(pd.DataFrame({"product": whole.data.keys["product"].astype(str)}),
                                           index=False).to_numpy(np.uint64)
    assert hashes == reference[[3, 7, 11]].tolist()
