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

from .compiled import compiled
from .folds import FoldLayout
from .kernels import trains_on
from .loo import loo_residuals
from .polyfit import FamilyFit, fit_family
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
    a, e = log.coef[:, :, 0, 0], log.coef[:, :, 0, 1]  # (S, F + 1)
    if loo:
        return _leave_one_out(u, z, volume, w, lay, log, counts, a[:, -1], e[:, -1])
    growth = np.empty((lay.n_folds + 1, len(u)))  # exp(log residual) of every row under every fit
    loglog_residuals(u, z, lay.bounds, a, e, growth)
    np.exp(growth, out=growth)  # numpy's vectorised exp: ~4× a compiled scalar loop here
    sse_test = np.empty((len(counts), lay.n_folds))
    smear, sse_full = np.empty(len(counts)), np.empty(len(counts))
    loglog_volume_errors(volume, np.empty(0) if w is None else w, lay.bounds, lay.held_out.astype(np.int64),
                                 lay.cumulative, growth, smear, sse_full, sse_test)
    return LoglogFit(log, sse_test.T, sse_full, smear, np.ones(len(counts), dtype=bool))


def _leave_one_out(u, z, volume, w, lay: FoldLayout, log: FamilyFit, counts, a, e) -> LoglogFit:
    weight = np.ones_like(volume) if w is None else w
    whole = lay.bounds[:, [0, -1]]
    full_exp = np.exp(z - np.repeat(a, counts) - np.repeat(e, counts) * u)  # exp(residual) of the full fit
    weighted_exp = weight * full_exp
    total_w = segment_sums(weight, whole)[:, 0]
    smear = segment_sums(weighted_exp, whole)[:, 0] / np.where(total_w > 0, total_w, 1.0)
    fitted = volume / full_exp
    sse_full = segment_sums(weight * (volume - fitted * np.repeat(smear, counts)) ** 2, whole)[:, 0]
    series = np.repeat(np.arange(len(counts)), counts)
    resid, defined = loo_residuals(u, z, w, series, log)
    others_w = np.repeat(total_w, counts) - weight
    smear_without = (np.repeat(smear * total_w, counts) - weighted_exp) / np.where(others_w > 0, others_w, 1.0)
    with np.errstate(over="ignore", invalid="ignore"):  # rows of leverage 1: marked undefined later
        held = volume * np.exp(-resid[0]) * smear_without
    return LoglogFit(log, (volume - held) ** 2, sse_full, smear, defined[0])


@compiled
def loglog_residuals(u, z, bounds, a, e, out):
    """``out[f, i]`` = zᵢ − a[s, f] − e[s, f]·uᵢ: the log-scale residual of row i under fit f of its series."""
    for s in range(bounds.shape[0]):
        for i in range(bounds[s, 0], bounds[s, -1]):
            for f in range(out.shape[0]):
                out[f, i] = z[i] - a[s, f] - e[s, f] * u[i]


@compiled
def loglog_volume_errors(volume, w, bounds, held_out, cumulative, growth, smear, sse_full, sse_test):
    """Volume-scale errors of the log-log fits, with Duan's smearing factor per fit.

    ``growth[f, i]`` = exp(log residual of row i under fit f).  A fit's
    smearing factor is the weighted mean of its growths over its training rows;
    its prediction at row i is volumeᵢ / growth[f, i] × smear.
    """
    n_folds = len(held_out)
    weighted = len(w) > 0
    spread = np.zeros(n_folds + 1)
    weight = np.zeros(n_folds + 1)
    for s in range(bounds.shape[0]):
        spread[:] = 0.0
        weight[:] = 0.0
        for b in range(bounds.shape[1] - 1):
            for f in range(n_folds + 1):
                if trains_on(f, b, held_out, cumulative):
                    for i in range(bounds[s, b], bounds[s, b + 1]):
                        wi = w[i] if weighted else 1.0
                        spread[f] += wi * growth[f, i]
                        weight[f] += wi
        for f in range(n_folds + 1):
            spread[f] = spread[f] / weight[f] if weight[f] > 0 else 1.0
        smear[s] = spread[n_folds]
        total = 0.0
        for i in range(bounds[s, 0], bounds[s, -1]):
            wi = w[i] if weighted else 1.0
            r = volume[i] - volume[i] / growth[n_folds, i] * spread[n_folds]
            total += wi * r * r
        sse_full[s] = total
        for f in range(n_folds):
            hb = held_out[f]
            total = 0.0
            for i in range(bounds[s, hb], bounds[s, hb + 1]):
                wi = w[i] if weighted else 1.0
                r = volume[i] - volume[i] / growth[f, i] * spread[f]
                total += wi * r * r
            sse_test[s, f] = total
