"""Choosing one candidate per series from its cross-validation results.

A pure function of stored results, so a different rule can be applied to a
results file without refitting.  Every rule goes through ``choose``.
"""
from __future__ import annotations

import numpy as np

from ..compiled import compiled

# Differences in mean CV error below this fraction of the series' variance
# are round-off, not evidence: such candidates count as equal, so the
# choice does not flip with the units of price or volume.
ROUND_OFF = 1e-9
TINY = float(np.finfo(float).tiny)


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
    chosen = np.empty(len(cv_mse), dtype=np.int64)
    choose_rows(rule == "one-se", np.asarray(cv_mse, dtype=np.float64), np.asarray(cv_se, dtype=np.float64),
                np.asarray(available, dtype=np.bool_), np.asarray(complexity, dtype=np.float64),
                np.asarray(variance, dtype=np.float64), chosen)
    return chosen


RULES = ("one-se", "lowest")


@compiled
def choose_rows(one_se, cv_mse, cv_se, available, complexity, variance, chosen):
    """``chosen[s]``: the candidate of series s under the rule (one-se or lowest), -1 when none.

    The bar is the lowest available mean CV error plus the larger of the
    round-off tolerance and (one-se) that candidate's standard error; among
    the candidates under it, the fewest coefficients, then the lowest error,
    then the first.
    """
    for s in range(cv_mse.shape[0]):
        best = np.inf
        winner = -1
        undecidable = False  # an available candidate without a CV error
        for c in range(cv_mse.shape[1]):
            if available[s, c]:
                undecidable = undecidable or np.isnan(cv_mse[s, c])
                if cv_mse[s, c] < best:
                    best = cv_mse[s, c]
                    winner = c
        if undecidable or winner < 0:
            chosen[s] = -1
            continue
        tolerance = ROUND_OFF * max(variance[s], TINY)
        slack = max(cv_se[s, winner], tolerance) if one_se else tolerance
        pick = -1
        for c in range(cv_mse.shape[1]):
            error = cv_mse[s, c]
            if not (available[s, c] and error <= best + slack):
                continue
            if pick < 0 or complexity[c] < complexity[pick] or (
                    complexity[c] == complexity[pick] and error < cv_mse[s, pick]):
                pick = c
        chosen[s] = pick
