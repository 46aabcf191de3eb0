"""Sums over contiguous segments of a row array."""
from __future__ import annotations

import numpy as np


def segment_sums(values: np.ndarray, bounds: np.ndarray) -> np.ndarray:
    """Sum ``values`` over consecutive segments.

    ``bounds``: (..., M + 1) non-decreasing positions; the segments of each
    leading row are ``bounds[..., m]:bounds[..., m + 1]`` and, read in order,
    must tile ``values`` from ``bounds.flat[0]`` without gaps.  Returns
    (..., M); an empty segment sums to 0 (``np.add.reduceat`` alone would
    return the next element there).
    """
    starts = bounds[..., :-1].ravel()
    ends = bounds[..., 1:].ravel()
    if len(values) == 0 or len(starts) == 0:
        return np.zeros(bounds.shape[:-1] + (bounds.shape[-1] - 1,))
    sums = np.add.reduceat(values, np.minimum(starts, len(values) - 1))
    sums[starts == ends] = 0.0
    return sums.reshape(bounds.shape[:-1] + (bounds.shape[-1] - 1,))
