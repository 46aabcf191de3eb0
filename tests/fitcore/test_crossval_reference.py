"""Cross-validation errors checked against scikit-learn and a brute-force loop.

Reference: scikit-learn's ``KFold(shuffle=False)``, ``LeaveOneOut`` and
``TimeSeriesSplit`` with ``cross_val_score(scoring="neg_mean_squared_error")``.
The polynomial pipeline scales price into [-1, 1] before building powers:
scikit-learn's ``LinearRegression`` on raw powers of price drops terms above
degree 2 (its singular-value cutoff), which would make the reference itself wrong.
"""
from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.linear_model import LinearRegression
from sklearn.model_selection import KFold, LeaveOneOut, TimeSeriesSplit, cross_val_score
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import MinMaxScaler, PolynomialFeatures

import fitcore
from tests.conftest import random_dataset, series_arrays, series_folds


def scaled_poly(degree: int):
    return make_pipeline(MinMaxScaler((-1, 1)), PolynomialFeatures(degree), LinearRegression())


def reference_scores(x, y, degree, splitter):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        scores = -cross_val_score(scaled_poly(degree), x[:, None], y, cv=splitter, scoring="neg_mean_squared_error")
    return scores.mean(), scores.std(ddof=1) / np.sqrt(len(scores)), scores


def check_against(results, data, splitter_for, rtol):
    compared = 0
    for s in range(data.n_series):
        x, y = series_arrays(data, s)
        order = np.argsort(data.date[data.offsets[s]:data.offsets[s + 1]], kind="stable") if data.date is not None else None
        if order is not None:
            x, y = x[order], y[order]
        for c, cand in enumerate(results.candidates):
            if cand.family != "poly" or not results.available[s, c]:
                continue
            mean, se, per_fold = reference_scores(x, y, cand.degree, splitter_for(len(x)))
            np.testing.assert_allclose(results.cv_mse[s, c], mean, rtol=rtol)
            np.testing.assert_allclose(results.cv_se[s, c], se, rtol=rtol)
            np.testing.assert_allclose(results.folds_of(s)[:, c], per_fold, rtol=rtol)
            compared += 1
    return compared


def test_kfold_in_file_order_matches_scikit_learn(shared_dataset):
    settings = fitcore.FitSettings(folds=5, fold_order="given", loglog=False)
    results = fitcore.fit_batch(shared_dataset, settings)
    compared = check_against(results, shared_dataset, lambda n: KFold(5, shuffle=False), rtol=1e-8)
    assert compared > 0.95 * 6 * shared_dataset.n_series


def test_kfold_with_three_folds_matches_scikit_learn():
    data = random_dataset(11, n_series=60, n_range=(7, 25))
    results = fitcore.fit_batch(data, fitcore.FitSettings(folds=3, fold_order="given", loglog=False))
    assert check_against(results, data, lambda n: KFold(3, shuffle=False), rtol=1e-8) > 100


def test_kfold_with_ten_folds_matches_scikit_learn():
    """Eleven fits a series: the lanes hold 46 series a group instead of 85 (five folds)."""
    data = random_dataset(9, n_series=12, n_range=(25, 40))
    results = fitcore.fit_batch(data, fitcore.FitSettings(folds=10, fold_order="given", loglog=False))
    assert check_against(results, data, lambda n: KFold(10, shuffle=False), rtol=1e-8) > 60


def test_leave_one_out_matches_scikit_learn():
    data = random_dataset(12, n_series=40, n_range=(8, 30))
    results = fitcore.fit_batch(data, fitcore.FitSettings(folds="loo", loglog=False))
    assert check_against(results, data, lambda n: LeaveOneOut(), rtol=1e-8) > 150


def test_time_ordered_folds_match_time_series_split():
    data = random_dataset(13, n_series=40, n_range=(15, 50), with_date=True)
    results = fitcore.fit_batch(data, fitcore.FitSettings(folds=4, fold_order="time", loglog=False))
    assert check_against(results, data, lambda n: TimeSeriesSplit(4), rtol=1e-8) > 150


def brute_force_press(x, y, degree, w=None):
    """Σ (yᵢ − ŷ₍₋ᵢ₎)², refitting without each row (numpy lstsq on a scaled Vandermonde)."""
    t = (x - (x.min() + x.max()) / 2) / ((x.max() - x.min()) / 2)
    w = np.ones_like(y) if w is None else w
    total = 0.0
    for i in range(len(x)):
        keep = np.arange(len(x)) != i
        basis = np.vander(t[keep], degree + 1, increasing=True) * np.sqrt(w[keep])[:, None]
        beta = np.linalg.lstsq(basis, y[keep] * np.sqrt(w[keep]), rcond=None)[0]
        total += w[i] * (y[i] - np.vander(t[i:i + 1], degree + 1, increasing=True) @ beta)[0] ** 2
    return total


@pytest.mark.parametrize("weighted", [False, True])
def test_leave_one_out_press_matches_refitting_every_row(weighted):
    data = random_dataset(14, n_series=25, n_range=(8, 40), with_weight=weighted)
    results = fitcore.fit_batch(data, fitcore.FitSettings(folds="loo", loglog=False))
    for s in range(data.n_series):
        x, y = series_arrays(data, s)
        w = None if data.weight is None else data.weight[data.offsets[s]:data.offsets[s + 1]]
        tss = np.sum((y - np.average(y, weights=w)) ** 2 * (1 if w is None else w))
        for c, cand in enumerate(results.candidates):
            if results.available[s, c]:
                press = brute_force_press(x, y, cand.degree, w)
                np.testing.assert_allclose(1 - results.q2[s, c], press / tss, rtol=1e-9)


def test_shuffled_folds_match_scikit_learn_given_the_same_assignment(shared_dataset):
    """With shuffled folds, per-fold errors equal scikit-learn's on the same index sets."""
    from fitcore.fit.folds import dataset_rows, split_indices
    settings = fitcore.FitSettings(folds=5, fold_order="shuffled", seed=3, loglog=False)
    results = fitcore.fit_batch(shared_dataset, settings)
    for s in range(0, shared_dataset.n_series, 15):
        splits = [(train - shared_dataset.offsets[s], test - shared_dataset.offsets[s])
                  for train, test in split_indices(shared_dataset.offsets, settings, s, **dataset_rows(shared_dataset))]
        x, y = series_arrays(shared_dataset, s)
        for c, cand in enumerate(results.candidates):
            if results.available[s, c]:
                mean, se, per_fold = reference_scores(x, y, cand.degree, splits)
                np.testing.assert_allclose(results.folds_of(s)[:, c], per_fold, rtol=1e-8)


def brute_force_loglog_folds(x, y, splits):
    """Per-fold MSE in volume units of ln y = a + e·ln x refitted on each training set, Duan-smeared."""
    out = []
    for train, test in splits:
        design = np.column_stack([np.ones(len(train)), np.log(x[train])])
        beta = np.linalg.lstsq(design, np.log(y[train]), rcond=None)[0]
        smear = np.mean(np.exp(np.log(y[train]) - design @ beta))
        predicted = np.exp(beta[0] + beta[1] * np.log(x[test])) * smear
        out.append(np.mean((y[test] - predicted) ** 2))
    return np.array(out)


@pytest.mark.parametrize("order", ["given", "shuffled"])
def test_loglog_fold_errors_match_refitting_each_fold(shared_dataset, order):
    from fitcore.fit.folds import dataset_rows, split_indices
    settings = fitcore.FitSettings(degrees=(1,), folds=5, fold_order=order)
    results = fitcore.fit_batch(shared_dataset, settings)
    c = results.names.index("loglog")
    for s in range(0, shared_dataset.n_series, 7):
        lo = shared_dataset.offsets[s]
        splits = [(train - lo, test - lo) for train, test in
                  split_indices(shared_dataset.offsets, settings, s, **dataset_rows(shared_dataset))]
        x, y = series_arrays(shared_dataset, s)
        per_fold = brute_force_loglog_folds(x, y, splits)
        np.testing.assert_allclose(results.folds_of(s)[:, c], per_fold, rtol=1e-9)
        np.testing.assert_allclose(results.cv_mse[s, c], per_fold.mean(), rtol=1e-9)


def refit_log_line_loo(x, y, w=None, controls=None):
    """Each row's squared volume error when left out: ln y = a + b·x (+ Σ γ·control) refitted by weighted least
    squares without it (``x`` the regressor: ln price or price), smeared by Duan's factor of that refit, the
    weighted mean of exp(residual) over its training rows (the README's definition, as for k folds)."""
    w = np.ones(len(x)) if w is None else w
    design = np.column_stack([np.ones(len(x)), x] + ([] if controls is None else list(controls)))
    errors = []
    for i in range(len(x)):
        keep = np.arange(len(x)) != i
        root = np.sqrt(w[keep])
        beta = np.linalg.lstsq(design[keep] * root[:, None], np.log(y[keep]) * root, rcond=None)[0]
        smear = np.average(np.exp(np.log(y[keep]) - design[keep] @ beta), weights=w[keep])
        errors.append((y[i] - np.exp(design[i] @ beta) * smear) ** 2)
    return np.array(errors)


@pytest.mark.parametrize("family", ["loglog", "semilog"])
def test_log_family_leave_one_out_equals_refitting_without_each_row(family):
    """Leave-one-out volume errors of the log families equal n refits, each smeared by its own training rows
    (numpy least squares on each row's training set: an outside reference for the hat-matrix shortcut)."""
    data = random_dataset(15, n_series=20, n_range=(5, 30))
    results = fitcore.fit_batch(data, fitcore.FitSettings(degrees=(1,), folds="loo", semilog=True))
    c = results.names.index(family)
    for s in range(data.n_series):
        x, y = series_arrays(data, s)
        regressor = np.log(x) if family == "loglog" else x
        np.testing.assert_allclose(results.folds_of(s)[:, c], refit_log_line_loo(regressor, y), rtol=1e-9)


def test_log_family_leave_one_out_with_weights_and_a_large_residual():
    """Weighted rows, and a row whose own term is most of the smearing sum (its residual far above the others'):
    the row-by-row route, still equal to the refits."""
    data = random_dataset(16, n_series=12, n_range=(6, 25), with_weight=True)
    volume = data.volume.copy()
    volume[data.offsets[:-1] + 2] *= 40.0  # one row a series sells forty times its curve
    data = fitcore.from_columns({"product": np.repeat(data.keys["product"], data.counts)}, data.price, volume,
                                weight=data.weight)
    results = fitcore.fit_batch(data, fitcore.FitSettings(degrees=(1,), folds="loo"))
    c = results.names.index("loglog")
    for s in range(data.n_series):
        rows = slice(data.offsets[s], data.offsets[s + 1])
        x, y, w = data.price[rows], data.volume[rows], data.weight[rows]
        np.testing.assert_allclose(results.folds_of(s)[:, c], refit_log_line_loo(np.log(x), y, w), rtol=1e-9)


def test_leave_one_out_equals_as_many_folds_as_rows_in_file_order():
    """``--folds loo`` and ``--folds n --fold-order given`` hold out the same rows one at a time: the same
    fold errors for every family (polynomials, loglog, semilog)."""
    n = 9
    data = random_dataset(17, n_series=6, n_range=(n, n + 1))
    loo = fitcore.fit_batch(data, fitcore.FitSettings(degrees=(0, 1, 2), folds="loo", semilog=True))
    given = fitcore.fit_batch(data, fitcore.FitSettings(degrees=(0, 1, 2), folds=n, fold_order="given", semilog=True))
    for s in range(data.n_series):
        np.testing.assert_allclose(loo.folds_of(s), given.folds_of(s), rtol=1e-9)


def refit_log_line_folds(x, y, w, splits):
    """Per-fold weighted volume MSE of ln y = a + b·x refitted by WLS on each training set (``x`` the
    regressor: ln price or price), with the weighted smearing of its training rows."""
    out = []
    for train, test in splits:
        design = np.column_stack([np.ones(len(train)), x[train]])
        root = np.sqrt(w[train])
        beta = np.linalg.lstsq(design * root[:, None], np.log(y[train]) * root, rcond=None)[0]
        smear = np.average(np.exp(np.log(y[train]) - design @ beta), weights=w[train])
        predicted = np.exp(beta[0] + beta[1] * x[test]) * smear
        out.append(np.average((y[test] - predicted) ** 2, weights=w[test]))
    return np.array(out)


@pytest.mark.parametrize("order", ["shuffled", "time"])
def test_loglog_smearing_is_exact_for_folds_near_and_far_from_the_full_fit(order):
    """A fold's smearing sum comes from a series in its slope gap δ when |δ| ≤ TAYLOR_REACH (mapped units),
    from the rows otherwise; both regimes must equal brute-force refits (numpy lstsq)."""
    from fitcore.fit.families.logvolume import TAYLOR_REACH
    rng = np.random.default_rng(11)
    counts = rng.integers(7, 16, 150)
    total = int(counts.sum())
    price = np.round(np.repeat(rng.uniform(1, 50, len(counts)), counts) * rng.uniform(0.5, 1.5, total), 2)
    noise = np.repeat(rng.uniform(0.05, 1.5, len(counts)), counts)  # some series very noisy: far folds
    volume = 300 * price ** -1.5 * rng.lognormal(0, noise)
    weight = rng.uniform(0.3, 3.0, total)
    date = np.concatenate([np.datetime64("2024-01-01") + rng.permutation(c).astype("timedelta64[D]") for c in counts])
    keys = {"product": np.repeat(np.array([f"item {i}" for i in range(len(counts))], dtype=object), counts)}
    data = fitcore.from_columns(keys, price, volume, weight=weight, date=date)
    settings = fitcore.FitSettings(degrees=(1,), folds=3, fold_order=order)
    results = fitcore.fit_batch(data, settings)
    c = results.names.index("loglog")
    tilts = []
    for s in range(data.n_series):
        if not results.available[s, c]:
            continue
        x, y, w, splits = series_folds(data, settings, s)
        np.testing.assert_allclose(results.folds_of(s)[:, c], refit_log_line_folds(np.log(x), y, w, splits),
                                   rtol=1e-9)
        # The slope gap in the engine's mapped ln price (the series' ln price range onto [-1, 1]).
        half = (np.log(x.max()) - np.log(x.min())) / 2
        full = np.polyfit(np.log(x), np.log(y), 1, w=np.sqrt(w))[0]
        tilts += [abs(np.polyfit(np.log(x[t]), np.log(y[t]), 1, w=np.sqrt(w[t]))[0] - full) * half for t, _ in splits]
    tilts = np.array(tilts)
    assert (tilts > TAYLOR_REACH * 1.01).sum() >= 5 and (tilts < TAYLOR_REACH * 0.99).sum() >= 50
