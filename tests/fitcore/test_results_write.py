"""The Parquet results columns built for all series at once equal what each cell's own computation gives.

- ``reason``: each unavailable cell's sentence (``Results.reason_text``, which counts a series' distinct
  prices with ``numpy.unique``), on data where most cells are unavailable for many different reasons;
- ``fold_mse``: each available cell's held-out errors (``Results.folds_of``);
- ``cov_unscaled``: each available cell's p × p block of ``covariances`` (checked against statsmodels'
  ``normalized_cov_params`` in ``test_snapshot.py``), row by row;
- the flags' messages quoted as ``json.dumps`` (the standard library) quotes them;
- with controls, ``controls``, ``control_values``, ``controls_left_out``: ``json.dumps`` of the JSON
  layout's dictionaries, cell by cell and series by series.
"""
from __future__ import annotations

import json

import numpy as np
import pyarrow.parquet as pq
import pytest

import fitcore
from fitcore.fit.settings import FitSettings
from fitcore.results.write import write_results
from fitcore.review.intervals import covariances
from tests.conftest import random_dataset


def awkward_dataset(seed: int = 3, n_series: int = 1500) -> fitcore.Dataset:
    """Short series with few distinct prices (some at or below zero, some volumes negative): most
    candidates unavailable, for too few rows, folds, distinct prices or a log of a non-positive number."""
    rng = np.random.default_rng(seed)
    keys, prices, volumes = [], [], []
    for s in range(n_series):
        n = int(rng.integers(1, 15))
        levels = rng.uniform(-1.0 if s % 17 == 0 else 1.0, 3.0, int(rng.integers(1, 6)))
        price = rng.choice(levels, n)
        keys += [f"s{s}"] * n
        prices += list(price)
        volumes += list(100 * np.abs(price) ** -1.2 * rng.uniform(0.8, 1.2, n) - (s % 23 == 0) * 200)
    return fitcore.from_columns({"product": np.array(keys, dtype=object)}, np.array(prices), np.array(volumes))


def test_each_unavailable_cells_reason_is_its_own_sentence(tmp_path):
    results = fitcore.fit_batch(awkward_dataset(), FitSettings())
    write_results(results, tmp_path / "r.parquet")
    stored = pq.read_table(tmp_path / "r.parquet").column("reason").to_pylist()
    n_c = results.available.shape[1]
    expected = [results.reason_text(*divmod(cell, n_c)) for cell in range(results.available.size)]
    assert (~results.available).sum() > results.available.size / 2 and len(set(expected)) > 10
    assert stored == expected


@pytest.mark.parametrize("every", [False, True])
def test_each_available_cells_covariance_is_its_block_of_the_padded_one(tmp_path, every):
    # Some cells unavailable (picked by a mask), or every one available (written in place).
    data = (random_dataset(14, n_series=100, n_range=(40, 60)) if every
            else random_dataset(11, n_series=300, n_range=(4, 40), with_weight=True))
    results = fitcore.fit_batch(data, FitSettings())
    assert results.available.all() == every and results.available.any()
    write_results(results, tmp_path / "r.parquet")
    stored = pq.read_table(tmp_path / "r.parquet").column("cov_unscaled").to_pylist()
    padded = covariances(results, np.arange(results.n_series))
    sizes = [c.complexity for c in results.candidates]
    n_c = len(sizes)
    for cell, values in enumerate(stored):
        s, c = divmod(cell, n_c)
        if not results.available[s, c]:
            assert values == []
            continue
        k = sizes[c]
        np.testing.assert_array_equal(np.array(values, dtype=float), padded[s, c, :k, :k].ravel())


def test_each_available_cells_fold_errors_are_its_folds(tmp_path):
    # Uniform fold counts (the column taken as one transposed block) and uneven ones (leave-one-out).
    for data, folds in ((random_dataset(12, n_series=200), 5), (awkward_dataset(5, n_series=400), 5),
                        (random_dataset(13, n_series=100, n_range=(8, 20)), "loo")):
        results = fitcore.fit_batch(data, FitSettings(folds=folds))
        assert (len(np.unique(np.diff(results.fold_start))) == 1) == (folds == 5)
        write_results(results, tmp_path / "r.parquet")
        stored = pq.read_table(tmp_path / "r.parquet").column("fold_mse").to_pylist()
        n_c = results.available.shape[1]
        for cell, values in enumerate(stored):
            s, c = divmod(cell, n_c)
            expected = results.folds_of(s)[:, c] if results.available[s, c] else []
            np.testing.assert_array_equal(np.array(values, dtype=float), np.asarray(expected, dtype=float))


@pytest.mark.parametrize("control", [False, True])
def test_flag_messages_are_quoted_as_json_dumps_quotes_them(control):
    from fitcore.results.table import _json_strings
    texts = ['plain', 'a "quoted" name', "back\\slash \\\"", "é ü — × 😀", "\x7f", ""]
    if control:  # the few holding control characters take json.dumps's own path
        texts += ["tab\there", "line\nbreak", "\x1b[2J screen", "\x00"]
    assert _json_strings(texts).to_pylist() == [json.dumps(t, ensure_ascii=False) for t in texts]


@pytest.mark.parametrize("season", [0, 1])
def test_control_texts_are_the_json_of_each_cells_and_series_fields(tmp_path, season):
    # A lone promotion row, a constant promotion and a constant competitor price: terms left out for
    # some series; short series: some candidates unavailable.  Reference: json.dumps of the JSON layout's
    # own per-cell and per-series dictionaries.
    from fitcore.results.control_fields import candidate_controls, series_controls
    from tests.fitcore.controls_support import controlled_data
    data = controlled_data(4, n_series=40, n_range=(5, 40))
    results = fitcore.fit_batch(data, FitSettings(degrees=(0, 1, 2, 3, 4), season=season))
    ctl = results.controls
    assert (np.asarray(ctl.left_out) != 0).any() and not results.available.all()
    write_results(results, tmp_path / "r.parquet")
    table = pq.read_table(tmp_path / "r.parquet")
    n_c = results.available.shape[1]
    cells, values, left_out = (table.column(name).to_pylist() for name in ("controls", "control_values",
                                                                           "controls_left_out"))
    for cell in range(len(cells)):
        s, c = divmod(cell, n_c)
        ok = bool(results.available[s, c])
        assert cells[cell] == (json.dumps(candidate_controls(ctl, s, c, True), ensure_ascii=False) if ok else None)
        fields = series_controls(ctl, s)
        assert values[cell] == json.dumps(fields["control_values"], ensure_ascii=False)
        assert left_out[cell] == json.dumps(fields["controls_left_out"], ensure_ascii=False)


def test_results_land_under_a_name_that_reads_like_a_uri(tmp_path):
    # The Parquet file is written by pyarrow under the temporary name: a local file, whatever the name says.
    folder = tmp_path / "s3:" / "bucket%20x"
    folder.mkdir(parents=True)
    results = fitcore.fit_batch(random_dataset(15, n_series=20), FitSettings())
    write_results(results, folder / "r.parquet")
    assert sorted(p.name for p in folder.iterdir()) == ["r.parquet"]
    assert pq.read_table(folder / "r.parquet").num_rows == results.available.size
