"""The constant-elasticity candidate: ln volume = a + e·ln price.

Fitted by least squares on the log scale (a degree-1 polynomial in mapped
ln price, through ``polyfit``), but judged in volume units so it competes
with the polynomials on one scale: a held-out prediction is
exp(fitted ln volume) × Duan's smearing factor, the mean of exp(residual)
over the fold's training rows (Duan 1983, J. Am. Stat. Assoc. 78:605–610).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .folds import FoldLayout
from .loo import loo_residuals
from .polyfit import FamilyFit, fit_family, row_blocks, train_and_test
from .segments import segment_sums


@dataclass(frozen=True, eq=False)
class LoglogFit:
    """Volume-scale errors of the log-log fit for one chunk.

    - ``log``: the log-scale fit (degree 1 in mapped ln price, centred ln volume).
    - ``sse_test``: (F, S) held-out squared volume error; for leave-one-out, per row (N,).
    - ``sse_full``: (S,) in-sample squared volume error.
    - ``smear``: (S,) the full fit's smearing factor.
    - ``defined``: (S,) leave-one-out residuals exist (always True for K folds).
    """

    log: FamilyFit
    sse_test: np.ndarray
    sse_full: np.ndarray
    smear: np.ndarray
    defined: np.ndarray


def fit_loglog(u: np.ndarray, z: np.ndarray, volume: np.ndarray, w: np.ndarray | None,
               lay: FoldLayout, loo: bool) -> LoglogFit:
    """``u``: mapped ln price, ``z``: centred ln volume, both in working order.

    With leave-one-out, the held-out ln volume is exact (hat matrix) and the
    smearing factor is the full fit's without the held-out row's own term.
    """
    log = fit_family(u, z, w, lay, (1,))
    counts = np.diff(lay.bounds[:, [0, -1]], axis=1)[:, 0]
    weight = np.ones_like(volume) if w is None else w
    a, e = log.coef[0, 0], log.coef[0, 1]  # (F + 1, S)
    whole = lay.bounds[:, [0, -1]]

    # exp(residual) of the full fit; a fold's is this × exp(−Δa − Δe·u), Δ = fold − full.
    full_exp = np.exp(z - np.repeat(a[-1], counts) - np.repeat(e[-1], counts) * u)
    weighted_exp = weight * full_exp
    total_w = segment_sums(weight, whole)[:, 0]
    smear = segment_sums(weighted_exp, whole)[:, 0] / np.where(total_w > 0, total_w, 1.0)
    fitted = volume / full_exp
    sse_full = segment_sums(weight * (volume - fitted * np.repeat(smear, counts)) ** 2, whole)[:, 0]

    if loo:
        series = np.repeat(np.arange(len(counts)), counts)
        resid, defined = loo_residuals(u, z, w, series, log)
        others_w = np.repeat(total_w, counts) - weight
        smear_without = (np.repeat(smear * total_w, counts) - weighted_exp) / np.where(others_w > 0, others_w, 1.0)
        with np.errstate(over="ignore", invalid="ignore"):  # rows of leverage 1: marked undefined below
            held = volume * np.exp(-resid[0]) * smear_without
        return LoglogFit(log, (volume - held) ** 2, sse_full, smear, defined[0])

    w_train, _ = train_and_test(segment_sums(weight, lay.bounds), lay)
    _, block = row_blocks(lay.bounds)
    sse_test = np.zeros((lay.n_folds, len(counts)))
    for f in range(lay.n_folds):
        shift = np.exp(-(np.repeat(e[f] - e[-1], counts) * u))  # per-series factor exp(−Δa) applied below
        train_sum, _ = train_and_test(segment_sums(weighted_exp * shift, lay.bounds), lay)
        smear_f = train_sum[f] * np.exp(-(a[f] - a[-1])) / np.where(w_train[f] > 0, w_train[f], 1.0)
        rows = np.flatnonzero(block == lay.held_out[f])
        series = np.repeat(np.arange(len(counts)), np.diff(lay.bounds[:, lay.held_out[f]:lay.held_out[f] + 2], axis=1)[:, 0])
        # Held-out prediction exp(fitted ln volume)·smear = fitted × exp(Δa + Δe·u) × smear.
        predicted = fitted[rows] * np.exp((a[f] - a[-1])[series]) / shift[rows] * smear_f[series]
        sse_test[f] = np.bincount(series, weight[rows] * (volume[rows] - predicted) ** 2, minlength=len(counts))
    return LoglogFit(log, sse_test, sse_full, smear, np.ones(len(counts), dtype=bool))
