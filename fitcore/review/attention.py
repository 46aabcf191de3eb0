"""The attention order: which series a human should look at first.

More ``stop`` flags first, then more ``warn`` flags, then the lower score
(a series without one, lowest of all), then the order given.  One
definition, for the flags of a fit (``Diagnosis.attention_order``), the
triage list and ``pricefold show``'s records alike.
"""
from __future__ import annotations

import numpy as np


def attention_order(n_stop, n_warn, score) -> np.ndarray:
    """Indices of the series in attention order; ``n_stop``, ``n_warn``, ``score`` (S,), score NaN where none."""
    score = np.asarray(score, dtype=float)
    score_key = np.where(np.isnan(score), -np.inf, score)
    return np.lexsort((np.arange(len(score)), score_key, -np.asarray(n_warn), -np.asarray(n_stop)))
