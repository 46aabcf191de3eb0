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
from .polyfit import FamilyFit, fit_family, train_and_test
from .segments import segment_sums


@dataclass(frozen=True, eq=False)
class LoglogFit:
    """Volume-scale errors of the log-log fit for one chunk.

    - ``log``: the log-scale fit (degree 1 in mapped ln price, centred ln volume).
    - ``sse_test``: (S, F) held-out squared volume error; for leave-one-out, per row (N,).
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
    """``u``: mapped ln price, ``z``: centred ln volume, both in working order."""
    log = fit_family(u, z, w, lay, (1,))
    counts = np.diff(lay.bounds[:, [0, -1]], axis=1)[:, 0]
    weight = np.ones_like(volume) if w is None else w
    a, e = log.coef[:, :, 0, 0], log.coef[:, :, 0, 1]

    def residual_exp(fit_index):
        r = z - (np.repeat(a[:, fit_index], counts) + np.repeat(e[:, fit_index], counts) * u)
        return np.exp(r)

    full_exp = residual_exp(-1)
    whole = lay.bounds[:, [0, -1]]
    total_w = segment_sums(weight, whole)[:, 0]
    smear = segment_sums(weight * full_exp, whole)[:, 0] / np.where(total_w > 0, total_w, 1.0)
    fitted = volume / full_exp * np.repeat(smear, counts)
    sse_full = segment_sums(weight * (volume - fitted) ** 2, whole)[:, 0]

    if loo:
        series = np.repeat(np.arange(len(counts)), counts)
        resid, defined = loo_residuals(u, z, w, series, log)
        others_w = np.repeat(total_w, counts) - weight
        smear_without = (np.repeat(smear * total_w, counts) - weight * full_exp) / np.where(others_w > 0, others_w, 1.0)
        held = volume * np.exp(-resid[:, 0]) * smear_without
        return LoglogFit(log, (volume - held) ** 2, sse_full, smear, defined[:, 0])

    sse_test = np.zeros((len(counts), lay.n_folds))
    w_blocks, _ = train_and_test(segment_sums(weight, lay.bounds)[..., None], lay)
    for f in range(lay.n_folds):
        ex = residual_exp(f)
        train_sum, _ = train_and_test(segment_sums(weight * ex, lay.bounds)[..., None], lay)
        smear_f = train_sum[:, f, 0] / np.where(w_blocks[:, f, 0] > 0, w_blocks[:, f, 0], 1.0)
        err = weight * (volume - volume / ex * np.repeat(smear_f, counts)) ** 2
        sse_test[:, f] = segment_sums(err, lay.bounds)[:, lay.held_out[f]]
    return LoglogFit(log, sse_test, sse_full, smear, np.ones(len(counts), dtype=bool))
