"""Whether the results on screen name their series by the key columns of the ledger's series.

``fitcore.ledger.key_columns.mismatch`` is the one check every command where results meet a ledger asks.
The screen asks it on opening and again whenever the ledger brings records (another analyst's, perhaps the
first of a new set of key columns), from the sets of key columns seen so far: one pass over the ledger's
series on opening, then only the new records' (a poll's few).  Keyed alike, results may still share not one
series with the ledger (a segment's values respelled: ``unshared``, from the session's lookup of the ledger's
series).  A first decision under either starts a new set of series in the ledger: the screen asks the analyst
first (``confirmed``), and ``decide`` checks the key columns again under the writer's lock (``with_keys``).
"""
from __future__ import annotations

from collections.abc import Iterable

from fitcore.ledger.key_columns import key_sets, mismatch, none_shared

from .text import clean


class KeyColumns:
    """The ledger's sets of key columns seen so far, and ``mismatch``: why the results' ``columns`` (product
    first) name none of its series, in one clause naming both (None: they match, or the ledger is empty)."""

    def __init__(self, columns: list[str], ledger_name: str) -> None:
        self.columns, self.ledger_name = columns, clean(ledger_name)
        self.mismatch: str | None = None
        self.unshared: str | None = None  # keyed alike, but none of the ledger's series is in these results
        self.confirmed: str | None = None  # the mismatch the analyst confirmed deciding under (a new set of series)
        self._sets: list[frozenset] = []

    def reset(self) -> None:
        """The ledger is read again from its start: nothing seen yet."""
        self._sets, self.mismatch, self.unshared = [], None, None

    def see(self, keys: Iterable[dict]) -> None:
        """Take note of the key columns of ``keys`` (series keys the ledger now holds)."""
        sets = self._and(keys)
        if len(sets) > len(self._sets):
            self._sets, self.mismatch = sets, self._mismatch(sets)

    def with_keys(self, keys: Iterable[dict]) -> str | None:
        """``mismatch`` were ``keys`` seen too (not taken note of: the records found under the writer's lock)."""
        return self._mismatch(self._and(keys))

    def _and(self, keys: Iterable[dict]) -> list[frozenset]:
        return self._sets + [names for names in key_sets(keys) if names not in self._sets]

    def _mismatch(self, sets: list[frozenset]) -> str | None:
        # one key stands for each set of columns: the check looks at a key's columns only
        return mismatch(self.columns, [dict.fromkeys(names) for names in sets], self.ledger_name)

    def share(self, shared: bool, same_columns: int) -> None:
        """Take note of whether any of the ledger's series is in these results (``shared``) and how many of its
        series are keyed by the results' columns (``same_columns``)."""
        self.unshared = none_shared(shared, same_columns, self.ledger_name) if self.mismatch is None else None

    @property
    def said(self) -> str | None:
        """Why a decision here would start a new set of series in the ledger (None: it would not)."""
        return self.mismatch or self.unshared

    @property
    def unconfirmed(self) -> str | None:
        """What a decision must be confirmed under first (None: nothing, or confirmed already)."""
        said = self.said
        return said if said != self.confirmed else None
