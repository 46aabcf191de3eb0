"""The series a ledger names, found among the results' series and given their statuses, many at once.

On opening, a session reads a whole ledger (one record per series after a cycle): each record's series is
found through a table of every series' key values, made once (``SeriesKeys.indices_of`` joins in Arrow,
whose join module imports pandas: 0.6–1.4 s before the first list), and the statuses are set in one pass
(one call per series cost 0.6 s at 100,000).
"""
from __future__ import annotations

import numpy as np

from fitcore.data.keys import FEW_KEYS, SeriesKeys

from .listing import STATUSES

CODE = {word: i for i, word in enumerate(STATUSES)}


class KeyTable:
    """Series indices of keys (mappings of key column to value), -1 where the results hold none (a key of
    other columns than theirs included, as ``SeriesKeys.indices_of`` finds it)."""

    def __init__(self, keys: SeriesKeys) -> None:
        self.keys, self._table = keys, None

    def indices_of(self, keys: list[dict]) -> list[int]:
        if len(keys) <= FEW_KEYS:  # a poll's few: a scan, no table
            return self.keys.indices_of(keys).tolist()
        names = self.keys.names
        if self._table is None:
            from fitcore.arrays import objects
            columns = [objects(self.keys.columns[name]).tolist() for name in names]
            rows = columns[0] if len(columns) == 1 else list(zip(*columns))  # one key column: its text itself
            # built from the last series back, so the first series with these values wins, as a scan finds it
            self._table = dict(zip(reversed(rows), range(len(rows) - 1, -1, -1)))
        get, columns = self._table.get, set(names)  # a key of other columns names none of these series
        if len(names) == 1:
            name = names[0]
            return [get(str(key[name]), -1) if key.keys() == columns else -1 for key in keys]
        return [get(tuple([str(key[name]) for name in names]), -1) if key.keys() == columns else -1 for key in keys]


def fingerprint_reader(data, count: int):
    """Series index → its fingerprint in ``data``, for ``count`` series: from the whole column at once where many
    are asked (one call a series costs), else one by one."""
    if count > 64:
        from fitcore.arrays import objects
        prints = data.fingerprints
        return (np.array(prints, dtype=object) if isinstance(prints, list) else objects(prints)).__getitem__
    return data.fingerprint_of


def set_statuses(status: np.ndarray, codes: np.ndarray, changed: dict[int, str], histories: dict, fingerprint) -> None:
    """``status`` and ``codes`` (index into ``STATUSES``) of the series ``changed`` (index → series id) from
    their ``histories``; ``fingerprint``: series index → its fingerprint in the results (``fingerprint_reader``:
    stale or not)."""
    words = [history.status(fingerprint(s)) if (history := histories.get(sid)) is not None and history.standing
             else "pending" for s, sid in changed.items()]
    at = np.fromiter(changed, dtype=np.int64, count=len(changed))
    status[at] = words
    codes[at] = [CODE[word] for word in words]
