"""Choosing one candidate per series from its cross-validation results.

A pure function of stored results, so a different rule can be applied to a
results file without refitting.  Every rule goes through ``choose``.
"""
from __future__ import annotations

import numpy as np

# Differences in mean CV error below this fraction of the series' variance
# are round-off, not evidence: such candidates count as equal, so the
# choice does not flip with the units of price or volume.
ROUND_OFF = 1e-9


def choose(rule: str, cv_mse: np.ndarray, cv_se: np.ndarray, available: np.ndarray,
           complexity: np.ndarray, variance: np.ndarray) -> np.ndarray:
    """(S,) index of the chosen candidate per series, -1 where none is available.

    ``cv_mse``, ``cv_se``, ``available``: (S, C); ``complexity``: (C,) number of
    coefficients; ``variance``: (S,) the series' volume variance (scales the
    round-off tolerance).

    - ``lowest``: the lowest mean CV error; ties to the simpler candidate.
    - ``one-se``: the least complex candidate whose mean CV error is within one
      standard error of the lowest (Hastie, Tibshirani & Friedman, *The
      Elements of Statistical Learning*, 2nd ed., §7.10); ties in complexity go
      to the lower mean CV error.
    """
    if rule not in RULES:
        raise ValueError(f"expected a rule among {sorted(RULES)}, got {rule!r}")
    mse = np.where(available, cv_mse, np.inf)
    best = mse.min(axis=1, initial=np.inf)
    tolerance = ROUND_OFF * np.maximum(variance, np.finfo(float).tiny)
    slack = RULES[rule](mse, np.where(available, cv_se, 0.0), best)
    eligible = available & (mse <= (best + np.maximum(slack, tolerance))[:, None])
    if rule == "lowest":
        eligible &= mse <= (best + tolerance)[:, None]
    # Least complex first, then lowest error: one lexicographic key.
    order = np.where(eligible, complexity[None, :] * 1.0, np.inf)
    simplest = order.min(axis=1, initial=np.inf)
    ranked = np.where(eligible & (order == simplest[:, None]), mse, np.inf)
    chosen = np.argmin(ranked, axis=1)
    return np.where(np.isfinite(best) & eligible.any(axis=1), chosen, -1)


def _one_se(mse, se, best):
    winner = np.argmin(mse, axis=1)
    return np.take_along_axis(se, winner[:, None], axis=1)[:, 0]


def _lowest(mse, se, best):
    return np.zeros(len(mse))


RULES = {"one-se": _one_se, "lowest": _lowest}
