"""A key column as the readers give it: codes into its distinct texts (numpy only, no pandas)."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True, eq=False)
class KeyCodes:
    """A key column as the readers give it: ``codes`` (N,) int32, each row's place in ``categories`` (-1 where
    the cell was missing), ``categories`` (C,) object array of the distinct texts, each once.  What a
    ``pandas.Categorical`` held for the checks and the grouping, without importing pandas (0.4 s, the
    largest part of triage's read of the observations behind its list)."""

    codes: np.ndarray
    categories: np.ndarray

    def __len__(self) -> int:
        return len(self.codes)

    def __getitem__(self, at) -> KeyCodes:
        return KeyCodes(self.codes[at], self.categories)

    def __array__(self, dtype=None, copy=None) -> np.ndarray:
        """Each row's text, NaN where missing (as ``numpy.asarray`` of a Categorical gives them)."""
        values = np.append(self.categories, np.nan)[self.codes]  # code -1: the appended NaN
        return values if dtype is None else values.astype(dtype)

    def categorical(self):
        """The same column as a ``pandas.Categorical`` (its categories an object Index), as the readers made it."""
        import pandas as pd
        return pd.Categorical.from_codes(self.codes, categories=pd.Index(self.categories.tolist(), dtype=object))
