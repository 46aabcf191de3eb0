"""A curve fitted with controls, away from its plan price: the interval signed, exported, backtested and drawn.

Reference: statsmodels ``WLS`` on [1, the price terms, the controls] and
``get_prediction(..., weights=the mean positive weight).summary_frame(alpha=0.05)``
``obs_ci_lower``/``obs_ci_upper`` at the point
[1, the price terms at p, the plan's control values] (the log families fitted to ln volume, the bounds
exponentiated), at three prices a series: its lowest, the middle of its range and 10% above its highest.
One control (a 0/1 promotion) alone, and with one season pair.
"""
from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

import fitcore
from fitcore import ledger
from fitcore.data.dataset import from_columns
from fitcore.fit.controls import season_terms
from fitcore.ledger.backtest import backtest
from fitcore.ledger.snapshot import at_prices, from_records, from_results
from fitcore.results.read import read_results
from fitcore.results.write import write_results
from fitcore.review.evidence import band
from fitcore.review.thresholds import Thresholds
from tests.fitcore.controls_support import control_rows, controlled_data, price_terms

CUT = np.datetime64("2024-01-01")


def promo_only(data, keep=None):
    """``data`` with the promotion as its one control (rows where ``keep``, all by default)."""
    keep = np.ones(len(data.price), dtype=bool) if keep is None else keep
    keys = np.repeat(data.keys["product"], data.counts)[keep]
    weight = None if data.weight is None else data.weight[keep]
    return from_columns({"product": keys}, data.price[keep], data.volume[keep], weight=weight,
                        date=data.date[keep], controls={"promo": data.controls["promo"][keep]})


def plan_of(data, season):
    """The plan price near each series' median, a planned promotion on every third series, a plan date on
    every other (with season terms); and each series' plan value of every term."""
    n = data.n_series
    price = np.array([np.median(data.price[data.offsets[s]:data.offsets[s + 1]]) * 1.05 for s in range(n)])
    promo = np.where(np.arange(n) % 3 == 0, 1.0, np.nan)
    date = np.where(np.arange(n) % 2 == 0, np.datetime64("2024-07-15", "ns"), np.datetime64("NaT", "ns"))
    held = [[0.0 if np.isnan(promo[s]) else 1.0,
             *((season_terms(date[s:s + 1], 1)[:, 0] if not np.isnat(date[s]) else np.zeros(2)) if season else ())]
            for s in range(n)]
    return dict(plan_price=price, plan_controls={"promo": promo}, plan_date=date), np.array(held)


def reference(data, s, cand, season, held, prices):
    """statsmodels' 95% prediction interval of candidate ``cand`` of series ``s`` at ``prices``."""
    rows = slice(data.offsets[s], data.offsets[s + 1])
    price, volume = data.price[rows], data.volume[rows]
    w = np.ones_like(price) if data.weight is None else data.weight[rows]
    logged = cand.family != "poly"
    fit = sm.WLS(np.log(volume) if logged else volume,
                 np.column_stack([np.ones(len(price)), price_terms(price, cand.family, cand.degree),
                                  control_rows(data, s, season)]), weights=w).fit()
    points = np.column_stack([np.ones(len(prices)), price_terms(prices, cand.family, cand.degree),
                              np.tile(held, (len(prices), 1))])
    # the planned week weighs as the series' average row of positive weight (statsmodels: the new rows'
    # ``weights``, "used for the variance of the predicted residual")
    frame = fit.get_prediction(points, weights=np.mean(w[w > 0])).summary_frame(alpha=0.05)
    bounds = frame[["obs_ci_lower", "obs_ci_upper"]].to_numpy().T
    return np.exp(bounds) if logged else bounds


def three_prices(data, s):
    price = data.price[data.offsets[s]:data.offsets[s + 1]]
    return np.array([price.min(), (price.min() + price.max()) / 2, price.max() * 1.1])


SETTINGS = dict(degrees=(0, 1, 2), semilog=True)


@pytest.mark.parametrize("season", [0, 1])
def test_signed_exported_and_drawn_intervals_are_statsmodels_at_the_plan_controls(season, tmp_path):
    data = promo_only(controlled_data(7, n_series=12, weighted=True, awkward=False))
    plan, held = plan_of(data, season)
    results = fitcore.fit_batch(data, fitcore.FitSettings(season=season, **SETTINGS), **plan)
    write_results(results, tmp_path / "r.json")
    write_results(results, tmp_path / "r.parquet")
    records = {"json": read_results(tmp_path / "r.json")[1], "parquet": read_results(tmp_path / "r.parquet")[1]}
    checked = set()
    for s in range(data.n_series):
        prices = three_prices(data, s)
        for c in np.flatnonzero(results.available[s]):
            cand = results.candidates[c]
            lo, hi = reference(data, s, cand, season, held[s], prices)
            signed = [from_results(results, [s], int(c))[0]] + [from_records([(r[s], cand.name)], 0.95)[0]
                                                                 for r in records.values()]
            for snap in signed:  # what is signed, and what the export computes from it at another price
                got = at_prices([snap] * 3, prices, 0.95)
                np.testing.assert_allclose([g["lo"] for g in got], lo, rtol=1e-8)
                np.testing.assert_allclose([g["hi"] for g in got], hi, rtol=1e-8)
            drawn = band(results, s, int(c), prices)  # the charts' band
            np.testing.assert_allclose(drawn, (lo, hi), rtol=1e-8)
            checked.add(cand.family)
    assert checked == {"poly", "loglog", "semilog"}


@pytest.mark.parametrize("season", [0, 1])
def test_backtest_coverage_is_the_share_inside_statsmodels_band_at_the_plan_controls(season, tmp_path):
    whole = controlled_data(8, n_series=12, awkward=False)
    new, old = promo_only(whole), promo_only(whole, whole.date < CUT)
    assert old.n_series == new.n_series
    plan, held = plan_of(old, season)
    settings = fitcore.FitSettings(season=season, **SETTINGS)
    signed = fitcore.fit_batch(old, settings, **plan)
    entries = [ledger.Entry(series=old.key_of(s), action="accept", fingerprint=old.fingerprints[s], results="ab" * 32,
                            model=signed.names[c], proposed=signed.names[c], signed=from_results(signed, [s], c)[0])
               for s, c in enumerate(signed.chosen.tolist()) if c >= 0]
    ledger.append(tmp_path / "l.jsonl", entries, ledger.Identity("ana", "ana", "host"))
    found = backtest(fitcore.fit_batch(new, settings, **plan), ledger.Ledger(tmp_path / "l.jsonl").histories,
                     Thresholds(), {})
    checked, families = 0, set()
    for s in range(new.n_series):
        c = int(signed.chosen[s])
        rows = slice(new.offsets[s], new.offsets[s + 1])
        later = new.date[rows] >= CUT
        if c < 0 or not later.any():
            continue
        lo, hi = reference(old, s, signed.candidates[c], season, held[s], new.price[rows][later])
        actual = new.volume[rows][later]
        inside = (lo <= actual) & (actual <= hi)
        assert found.outside[s] == (~inside).sum()
        np.testing.assert_allclose(found.coverage[s], inside.mean())
        checked += len(actual)
        families.add(signed.candidates[c].family)
    assert checked > 50 and len(families) >= 2


def test_parquet_written_before_the_change_is_read_as_holding_no_covariance(tmp_path):
    """A controlled Parquet file whose header lacks ``controls.cov_unscaled`` (written before it was at the
    plan's values): stored results and ``accept-unflagged``'s column reader sign no interval from it."""
    import hashlib
    import json

    import pyarrow.parquet as pq

    from fitcore.ledger.proposals import unflagged
    from fitcore.results.stored import stored_results
    data = promo_only(controlled_data(9, n_series=12, awkward=False))
    plan, _ = plan_of(data, 1)
    results = fitcore.fit_batch(data, fitcore.FitSettings(season=1, **SETTINGS), **plan)
    write_results(results, tmp_path / "new.parquet")
    table = pq.read_table(tmp_path / "new.parquet")
    header = json.loads(table.schema.metadata[b"pricefold"])
    del header["settings"]["controls"]["cov_unscaled"]
    text = json.dumps(header).encode()
    pq.write_table(table.replace_schema_metadata({**table.schema.metadata, b"pricefold": text,
                                                  b"pricefold_sha256": hashlib.sha256(text).hexdigest().encode()}),
                   tmp_path / "old.parquet")
    for name, complete in (("new.parquet", True), ("old.parquet", False)):
        stored, _ = stored_results(tmp_path / name)
        s, c = 0, int(results.chosen[0])
        snap = from_results(stored, [s], c)[0]
        assert ("incomplete" not in snap) == complete and (snap["plan"]["lo"] is not None) == complete
        if complete:
            assert snap == from_results(results, [s], c)[0]
        proposals = unflagged(tmp_path / name)[1]
        assert proposals and all((p[3]["cov_unscaled"] is not None) == complete for p in proposals)
