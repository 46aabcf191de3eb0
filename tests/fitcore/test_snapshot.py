"""The signed-model snapshot: its interval parts against statsmodels, and the same snapshot whichever
way the results reach it (a fit, JSON, Parquet read back as records or as stored results).

Reference: statsmodels ``WLS(...).fit().normalized_cov_params`` is (XᵀWX)⁻¹, the unscaled covariance
a signed curve carries; its ``get_prediction(...).summary_frame(alpha=0.05)`` gives the 95%
prediction interval (``obs_ci_lower``/``obs_ci_upper``) at a new price.
"""
from __future__ import annotations

import json

import numpy as np
import pyarrow.parquet as pq
import statsmodels.api as sm

import fitcore
from fitcore.ledger.snapshot import INCOMPLETE, evaluate, fit_terms, from_records, from_results
from fitcore.results.read import read_results
from fitcore.results.stored import stored_results
from fitcore.results.write import write_results
from fitcore.review.intervals import covariances, last_dates
from tests.conftest import random_dataset


def test_covariances_of_every_candidate_match_statsmodels():
    data = random_dataset(51, n_series=25, with_weight=True)
    results = fitcore.fit_batch(data, fitcore.FitSettings(semilog=True))
    cov = covariances(results, np.arange(results.n_series))
    checked = 0
    for s in range(data.n_series):
        rows = slice(data.offsets[s], data.offsets[s + 1])
        for c in np.flatnonzero(results.available[s]):
            k = results.candidates[c].complexity
            family = results.family_of(c)
            t = family.coordinate(data.price[rows], results.basis_mid[s, c], results.basis_half[s, c])
            w = data.weight[rows]
            fit = sm.WLS(family.response(data.volume[rows]), np.vander(t, k, increasing=True), weights=w).fit()
            unit = np.mean(w[w > 0])  # the planned week's weight: σ² and (XᵀWX)⁻¹ of the weights over it
            np.testing.assert_allclose(cov[s, c, :k, :k], fit.normalized_cov_params * unit, rtol=1e-7, atol=1e-12)
            np.testing.assert_allclose(results.sigma2[s, c], fit.scale / unit, rtol=1e-7)
            assert results.df[s, c] == fit.df_resid
            checked += 1
        assert np.isnan(cov[s, ~results.available[s]]).all()
    assert checked > 150


def test_snapshot_interval_at_a_new_price_matches_statsmodels_get_prediction():
    data = random_dataset(52, n_series=20)
    results = fitcore.fit_batch(data, fitcore.FitSettings(degrees=(1, 2), loglog=False))
    for s in range(data.n_series):
        rows = slice(data.offsets[s], data.offsets[s + 1])
        price, volume = data.price[rows], data.volume[rows]
        for c in np.flatnonzero(results.available[s]):
            snap = from_results(results, [s], int(c))[0]
            k = len(snap["coef"])
            new = np.linspace(price.min() * 0.9, price.max() * 1.1, 5)
            fit = sm.OLS(volume, np.vander(price, k, increasing=True)).fit()  # raw prices: degree ≤ 2 is safe
            frame = fit.get_prediction(np.vander(new, k, increasing=True)).summary_frame(alpha=0.05)
            b = snap["basis"]
            got = evaluate(fitcore.fit.families.BY_NAME["poly"], np.tile(b["coef"], (5, 1)), np.full(5, b["mid"]),
                           np.full(5, b["half"]), np.full(5, np.nan), np.tile(snap["cov_unscaled"], (5, 1, 1)),
                           np.full(5, snap["sigma2"]), np.full(5, snap["df"]), new, 0.95)
            np.testing.assert_allclose(got[0], frame["mean"], rtol=1e-8)
            np.testing.assert_allclose(got[1], frame["obs_ci_lower"], rtol=1e-7, atol=1e-6)
            np.testing.assert_allclose(got[2], frame["obs_ci_upper"], rtol=1e-7, atol=1e-6)
            np.testing.assert_allclose(np.polyval(snap["coef"][::-1], new), frame["mean"], rtol=1e-8)


def test_snapshot_plan_is_the_results_plan_and_every_route_gives_the_same_snapshot(tmp_path):
    data = random_dataset(53, n_series=20, with_weight=True, with_date=True)
    plan = np.array([np.median(data.price[data.offsets[s]:data.offsets[s + 1]]) for s in range(data.n_series)])
    results = fitcore.fit_batch(data, fitcore.FitSettings(semilog=True), plan_price=plan)
    write_results(results, tmp_path / "r.json")
    write_results(results, tmp_path / "r.parquet")
    json_records = read_results(tmp_path / "r.json")[1]
    parquet_records = read_results(tmp_path / "r.parquet")[1]
    stored, _ = stored_results(tmp_path / "r.parquet")
    days = last_dates(results)
    for s in range(0, data.n_series, 3):
        rows = slice(data.offsets[s], data.offsets[s + 1])
        assert str(days[s]) == str(data.date[rows].max())[:10]
        for c in np.flatnonzero(results.available[s]):
            name = results.names[c]
            snap = from_results(results, [s], int(c))[0]
            p = snap["plan"]
            np.testing.assert_allclose([p["volume"], p["lo"], p["hi"], p["elasticity"]],
                                       [results.plan_volume[s, c], results.plan_lo[s, c], results.plan_hi[s, c],
                                        results.plan_elasticity[s, c]], rtol=1e-9)
            assert snap["last_date"] == str(days[s]) and snap["n"] == data.counts[s] and "incomplete" not in snap
            assert json.dumps(from_results(stored, [s], int(c))[0]) == json.dumps(snap)  # bit for bit
            for records in (json_records, parquet_records):
                other = from_records([(records[s], name)], 0.95, fitted=fit_terms(results.settings.as_dict()))[0]
                assert other.keys() == snap.keys() and other["cv"] == snap["cv"] and other["weight"] is None
                np.testing.assert_allclose(np.array(other["cov_unscaled"]), np.array(snap["cov_unscaled"]), rtol=1e-12)
                np.testing.assert_allclose(other["plan"]["hi"], snap["plan"]["hi"], rtol=1e-12)


def test_results_without_interval_parts_give_an_incomplete_snapshot_that_says_so(tmp_path):
    data = random_dataset(54, n_series=5)
    results = fitcore.fit_batch(data, plan_price=100.0)
    write_results(results, tmp_path / "r.parquet")
    table = pq.read_table(tmp_path / "r.parquet")
    older = table.drop_columns(["sigma2", "df", "cov_unscaled", "last_date"])
    pq.write_table(older.replace_schema_metadata(table.schema.metadata), tmp_path / "old.parquet")
    stored, _ = stored_results(tmp_path / "old.parquet")
    c = int(stored.chosen[0])
    snap = from_results(stored, [0], c)[0]
    assert snap["cov_unscaled"] is None and snap["sigma2"] is None and snap["df"] is None
    assert snap["incomplete"] == INCOMPLETE and snap["last_date"] is None
    assert snap["plan"]["lo"] is None and snap["plan"]["volume"] == results.plan_volume[0, c]


def test_a_signed_record_is_written_as_its_canonical_json_whatever_its_key_holds(tmp_path):
    """The writer encodes the signed model once and puts its bytes in place; the line must still be the
    record's canonical JSON (a series key that mimics the stand-in, or names a column 'signed', included)."""
    from fitcore import ledger
    from fitcore.ledger.records import canonical
    key = {"product": "\x00signed\x00", "signed": "\x00signed\x00", "supersedes": "x"}
    signed = {"candidate": "poly1", "coef": [1.5, -0.25], "nested": {"signed": "\x00signed\x00"}}
    [record] = ledger.append(tmp_path / "l.jsonl", [ledger.Entry(series=key, action="accept", fingerprint="f" * 64,
                                                                  results="ab" * 32, model="poly1", signed=signed)],
                             ledger.Identity("ana", "ana", "host"))
    line = (tmp_path / "l.jsonl").read_bytes()
    assert line == canonical(record) + b"\n" and record["signed"] == signed and record["series"] == key
    assert ledger.verify(tmp_path / "l.jsonl") == [] and ledger.Ledger(tmp_path / "l.jsonl").records[0] == record
