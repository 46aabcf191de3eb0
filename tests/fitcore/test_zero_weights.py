"""Weights: rows of weight 0 make no fold and count in no score; intervals the same in any unit of weight.

References: scikit-learn ``KFold`` / ``TimeSeriesSplit`` over a series' rows of positive weight (file
order / date order), statsmodels ``WLS`` refitted on each training set (and, for leave-one-out, without
each row in turn), each fold's error the weighted mean Σw·e²/Σw of its held-out rows (the README's
definition); statsmodels ``WLS(...).get_prediction(x, weights=w0).summary_frame(alpha=0.05)`` for a new
observation of weight w0 (statsmodels/regression/_prediction.py, ``get_prediction``: "weights …
used for the variance of the predicted residual", ``var_resid /= weights``).

Data: ``tests/reference/zero_weights.csv.gz``, from a new user's trial (4 invented series of 104 weekly
rows, the first 21 of each weighing 0: old weeks weighted out), and a small case made here.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import statsmodels.api as sm
from sklearn.model_selection import KFold, TimeSeriesSplit

import fitcore
from fitcore.data.loader import Columns, load
from fitcore.review.flags import diagnose

TRIAL = Path(__file__).resolve().parents[1] / "reference" / "zero_weights.csv.gz"
SETTINGS = dict(degrees=(0, 1, 2, 3), loglog=True)


def trial_data():
    return load(TRIAL, Columns(segments=("region",), date="week", weight="w"))


def small_data():
    """Three series: 36 rows with every fourth weighing 0 (priced inside the others' range); 12 rows of which
    only 3 weigh more than 0; 25 rows none of which weighs 0."""
    rng = np.random.default_rng(36)
    parts = []
    for name, n, zero in (("every fourth", 36, np.arange(36) % 4 == 1), ("three left", 12, np.arange(12) >= 3),
                          ("none zero", 25, np.zeros(25, bool))):
        price = np.round(rng.uniform(2.0, 4.0, n), 2)
        price[[0, 2]] = 1.5, 4.5  # the range's ends weigh more than 0
        weight = np.where(zero, 0.0, np.round(rng.uniform(0.5, 3.0, n), 2))
        volume = 900 - 150 * price + rng.normal(0, 20, n) / np.sqrt(np.where(weight > 0, weight, 1))
        date = np.datetime64("2024-01-01") + 7 * rng.permutation(n).astype("timedelta64[D]")
        parts.append((np.full(n, name, dtype=object), price, volume, weight, date))
    product, price, volume, weight, date = (np.concatenate(column) for column in zip(*parts))
    return fitcore.from_columns({"product": product}, price, volume, weight=weight, date=date.astype("datetime64[ns]"))


def design(family, degree, price, mid, half):
    if family == "poly":
        return np.vander((price - mid) / half, degree + 1, increasing=True)
    return np.column_stack([np.ones(len(price)), np.log(price)])


def refit_errors(family, degree, x, y, w, train, test, mid, half):
    """Squared volume errors on ``test`` of the WLS fit on ``train`` (log-log: Duan-smeared, weighted)."""
    response = y if family == "poly" else np.log(y)
    fit = sm.WLS(response[train], design(family, degree, x[train], mid, half), weights=w[train]).fit()
    fitted = design(family, degree, x[test], mid, half) @ fit.params
    if family != "poly":
        fitted = np.exp(fitted) * np.average(np.exp(fit.resid), weights=w[train])
    return (y[test] - fitted) ** 2


def reference_cv(data, s, cand, order, k):
    """(cv_mse, per-fold or None): scikit-learn's folds over the rows of positive weight, statsmodels' refits."""
    rows = slice(data.offsets[s], data.offsets[s + 1])
    x, y, w, date = data.price[rows], data.volume[rows], data.weight[rows], data.date[rows]
    mid, half = (x.min() + x.max()) / 2, (x.max() - x.min()) / 2
    family, degree = cand.family, cand.degree
    positive = np.flatnonzero(w > 0)
    if order == "loo":
        errors = np.array([refit_errors(family, degree, x, y, w, np.delete(positive, i), positive[i:i + 1], mid,
                                        half)[0] for i in range(len(positive))])
        return np.sum(w[positive] * errors) / np.sum(w[positive]), None
    if order == "time":
        positive = positive[np.argsort(date[positive], kind="stable")]
        splits = TimeSeriesSplit(n_splits=k).split(positive)
    else:
        splits = KFold(k).split(positive)
    folds = []
    for train, test in splits:
        errors = refit_errors(family, degree, x, y, w, positive[train], positive[test], mid, half)
        folds.append(np.sum(w[positive[test]] * errors) / np.sum(w[positive[test]]))
    return np.mean(folds), np.array(folds)


@pytest.mark.parametrize("make", [trial_data, small_data], ids=["trial", "small"])
@pytest.mark.parametrize("order, k", [("given", 5), ("time", 4), ("loo", None)])
def test_scores_match_refits_over_the_rows_of_positive_weight(make, order, k):
    data = make()
    folds = {"folds": "loo"} if order == "loo" else {"folds": k, "fold_order": order}
    results = fitcore.fit_batch(data, fitcore.FitSettings(**folds, **SETTINGS), plan_price=2.4)
    checked = 0
    for s in range(data.n_series):
        for c, cand in enumerate(results.candidates):
            if not results.available[s, c]:
                continue
            cv, per_fold = reference_cv(data, s, cand, order, k)
            np.testing.assert_allclose(results.cv_mse[s, c], cv, rtol=1e-8)
            if per_fold is not None:
                np.testing.assert_allclose(results.folds_of(s)[:, c], per_fold, rtol=1e-8)
            checked += 1
    # every candidate of every series with enough rows of positive weight has its scores
    enough = [s for s in range(data.n_series) if (data.weight[data.offsets[s]:data.offsets[s + 1]] > 0).sum() > 5]
    assert results.available[enough].all() and checked >= len(enough) * len(results.candidates)


@pytest.mark.parametrize("folds", [{"folds": 5, "fold_order": "given"}, {"folds": 4, "fold_order": "time"},
                                   {"folds": 5}, {"folds": "loo"}])
def test_rows_of_weight_zero_change_no_number(folds):
    """The fit with its rows of weight 0 is the fit without them: same folds, scores, choice and interval."""
    data = trial_data()
    keep = data.weight > 0
    keys = {"product": np.repeat(data.keys["product"], data.counts)[keep],
            "region": np.repeat(data.keys["region"], data.counts)[keep]}
    alone = fitcore.from_columns(keys, data.price[keep], data.volume[keep], weight=data.weight[keep],
                                 date=data.date[keep])
    settings = fitcore.FitSettings(**folds, **SETTINGS)
    ours, theirs = (fitcore.fit_batch(d, settings, plan_price=2.4) for d in (data, alone))
    np.testing.assert_array_equal(ours.chosen, theirs.chosen)
    np.testing.assert_array_equal(ours.available, theirs.available)
    np.testing.assert_array_equal(ours.df, theirs.df)
    for name in ("cv_mse", "cv_se", "q2", "r2", "plan_volume", "plan_lo", "plan_hi", "sigma2"):
        np.testing.assert_allclose(getattr(ours, name), getattr(theirs, name), rtol=1e-9, err_msg=name)


def test_equal_weights_score_leave_one_out_as_no_weights():
    """Leave-one-out's weighted mean and its standard error are the plain ones when every weight is alike."""
    data = small_data()
    keep = data.weight > 0
    product = np.repeat(data.keys["product"], data.counts)[keep]
    plain = fitcore.from_columns({"product": product}, data.price[keep], data.volume[keep])
    alike = fitcore.from_columns({"product": product}, data.price[keep], data.volume[keep],
                                 weight=np.full(int(keep.sum()), 2.5))
    settings = fitcore.FitSettings(folds="loo", **SETTINGS)
    a, b = (fitcore.fit_batch(d, settings) for d in (plain, alike))
    for name in ("cv_mse", "cv_se", "q2"):
        np.testing.assert_allclose(getattr(a, name), getattr(b, name), rtol=1e-12, err_msg=name)


def test_a_series_short_of_positive_weights_says_so():
    data = small_data()
    results = fitcore.fit_batch(data, fitcore.FitSettings(folds=5, **SETTINGS))
    s = list(data.keys["product"]).index("three left")
    assert results.chosen[s] < 0
    assert results.reason_text(s, 0) == "3 observations of positive weight cannot be split into 5 folds"
    flags = diagnose(results).flags_of(s)
    assert [f["code"] for f in flags] == ["few-points"]
    assert flags[0]["message"].startswith("Only 3 observations of positive weight: too few to cross-validate")
    every = list(data.keys["product"]).index("every fourth")  # 27 rows of positive weight
    assert results.chosen[every] >= 0


def reference_interval(data, s, cand, at, w0):
    rows = slice(data.offsets[s], data.offsets[s + 1])
    x, y, w = data.price[rows], data.volume[rows], data.weight[rows]
    mid, half = (x.min() + x.max()) / 2, (x.max() - x.min()) / 2
    logged = cand.family != "poly"
    x, y, w = x[w > 0], y[w > 0], w[w > 0]  # statsmodels would count rows of weight 0 in its degrees of freedom
    fit = sm.WLS(np.log(y) if logged else y, design(cand.family, cand.degree, x, mid, half), weights=w).fit()
    frame = fit.get_prediction(design(cand.family, cand.degree, np.array([at]), mid, half),
                               weights=w0).summary_frame(alpha=0.05)
    bounds = frame[["obs_ci_lower", "obs_ci_upper"]].to_numpy()[0]
    return np.exp(bounds) if logged else bounds


def test_the_planned_week_weighs_as_the_average_row_of_positive_weight():
    data = trial_data()
    results = fitcore.fit_batch(data, fitcore.FitSettings(folds=5, fold_order="given", **SETTINGS), plan_price=2.4)
    checked = 0
    for s in range(data.n_series):
        w = data.weight[data.offsets[s]:data.offsets[s + 1]]
        for c in np.flatnonzero(results.available[s]):
            lo, hi = reference_interval(data, s, results.candidates[c], 2.4, np.mean(w[w > 0]))
            np.testing.assert_allclose([results.plan_lo[s, c], results.plan_hi[s, c]], [lo, hi], rtol=1e-8)
            checked += 1
    assert checked == data.n_series * len(results.candidates)


def scaled(data, factor):
    keys = {name: np.repeat(np.asarray(values, dtype=object), data.counts) for name, values in data.keys.items()}
    return fitcore.from_columns(keys, data.price, data.volume, weight=data.weight * factor, date=data.date,
                                controls={name: values for name, values in data.controls.items()} or None)


@pytest.mark.parametrize("controls", [False, True])
def test_intervals_do_not_depend_on_the_unit_of_weight(controls):
    """Weights ×1000 and ÷1000: the same plan interval, stored interval parts and drawn band (1e-9)."""
    from fitcore.review.evidence import band
    from fitcore.review.intervals import covariances
    columns = Columns(segments=("region",), date="week", weight="w", controls=("promo",) if controls else ())
    data = load(TRIAL, columns)
    settings = fitcore.FitSettings(folds=5, semilog=True, season=1 if controls else 0)
    plan = dict(plan_price=2.4)
    if controls:
        plan |= dict(plan_controls={"promo": np.ones(data.n_series)},
                     plan_date=np.full(data.n_series, np.datetime64("2026-03-15", "ns")))
    fits = [fitcore.fit_batch(d, settings, **plan) for d in (data, scaled(data, 1000.0), scaled(data, 0.001))]
    base = fits[0]
    assert base.available.all()
    parts = lambda r: r.sigma2[:, :, None, None] * covariances(r, np.arange(r.n_series))  # noqa: E731
    for other in fits[1:]:
        np.testing.assert_array_equal(other.chosen, base.chosen)
        for name in ("plan_volume", "plan_lo", "plan_hi", "cv_mse", "cv_se"):
            np.testing.assert_allclose(getattr(other, name), getattr(base, name), rtol=1e-9, err_msg=name)
        np.testing.assert_allclose(parts(other), parts(base), rtol=1e-9, atol=1e-12)
        prices = np.array([1.6, 2.4, 3.4])
        for s in range(base.n_series):
            for c in range(len(base.candidates)):
                np.testing.assert_allclose(band(other, s, c, prices), band(base, s, c, prices), rtol=1e-9)


@pytest.mark.parametrize("folds", [{"folds": 5}, {"folds": 4, "fold_order": "time"}, {"folds": "loo"}])
def test_chunks_cut_anywhere_give_the_same_weighted_fit(monkeypatch, folds):
    """A weighted fit with rows of weight 0 cut into many chunks is the fit in one chunk (an invariance)."""
    from fitcore.fit import engine
    data = trial_data()
    settings = fitcore.FitSettings(**folds, **SETTINGS)
    whole = fitcore.fit_batch(data, settings, plan_price=2.4, threads=1)
    monkeypatch.setattr(engine, "CHUNK_ROWS", 150)  # a chunk a series or two
    cut = fitcore.fit_batch(data, settings, plan_price=2.4, threads=1)
    for name in ("chosen", "cv_mse", "cv_se", "fold_err", "plan_lo", "plan_hi", "sigma2", "top_cook", "top_row"):
        np.testing.assert_array_equal(getattr(cut, name), getattr(whole, name), err_msg=name)
