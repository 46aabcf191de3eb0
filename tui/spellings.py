"""Which series on screen look like one of the ledger's under another spelling, kept as the ledger grows.

``fitcore.ledger.respelling`` is the one rule every command asks: a results' series new to the ledger whose key
equals, loosely (case, Unicode form, white space), that of a ledger series missing from the results.  The screen
learns the ledger record by record (on opening, then each poll's few), so the rule is fed as it goes: which
series the ledger holds (``see``'s ``hits``) and which of its series the results lack (``see``'s ``missing``).  The
series new to the ledger when the first missing series comes are indexed by loose key once; each missing series
after that is one probe.  A series decided since is no longer new and drops out.

A decision on such a series records a new series beside the one it looks like: the screen asks first, once per
series and per set of look-alikes (``confirm``), and ``decide`` asks again under the writer's lock with the
records found there (``unconfirmed`` with ``fresh``).
"""
from __future__ import annotations

from collections.abc import Iterable

import numpy as np

from fitcore.data.keys import SEPARATOR, SeriesKeys
from fitcore.ledger.replay import series_id
from fitcore.ledger.respelling import NONE, LooseIndex, Respelled, beside, gathered, ledger_spelling, loose_key

from .text import clean


class Spellings:
    """The results' series (``keys``) that look like a ledger series under another spelling (``found``)."""

    def __init__(self, keys: SeriesKeys, ledger_name: str) -> None:
        self.keys, self.ledger_name = keys, clean(ledger_name)
        self.columns = keys.names
        self.reset()
        self.confirmed: dict[str, frozenset] = {}  # series id → the look-alikes' ids the analyst confirmed beside

    def reset(self) -> None:
        """The ledger is read again from its start: nothing seen yet."""
        self.in_ledger = np.zeros(len(self.keys), dtype=bool)
        self.missing: list[tuple] = []  # the ledger's series keyed alike and not in the results, in the order met
        self._index: LooseIndex | None = None
        self._pairs: list[tuple[np.ndarray, np.ndarray]] = []  # (series, place in ``missing``) found so far
        self.found: Respelled = NONE
        self._like: dict[int, int] = {}
        self.marked = np.zeros(len(self.keys), dtype=bool)  # (S,) the look-alikes: the list's "needs attention"

    def see(self, hits: Iterable[int], missing: Iterable[dict]) -> None:
        """Take note of series the ledger names: ``hits``, those of the results (indices); ``missing``, the keys of
        those the results do not hold."""
        hits = np.fromiter(hits, dtype=np.int64)
        self.in_ledger[hits] = True
        names = set(self.columns)
        probes = [tuple(key[name] for name in self.columns) for key in missing if key.keys() == names]
        if probes and not self.in_ledger.all():
            if self._index is None:  # the series new to the ledger now; only fewer are, later
                new = np.flatnonzero(~self.in_ledger)
                self._index = LooseIndex(self._values(new), new.tolist())
            start = len(self.missing)
            self._pairs.append(self._index.pairs(probes, range(start, start + len(probes))))
        self.missing += probes
        if self._pairs and (len(hits) or probes):
            self._gather()

    def _values(self, at: np.ndarray) -> list[tuple]:
        from fitcore.arrays import integers, objects
        index = integers(at)
        return list(zip(*(objects(self.keys.columns[name].take(index)).tolist() for name in self.columns)))

    def _gather(self) -> None:
        series = np.concatenate([p[0] for p in self._pairs])
        place = np.concatenate([p[1] for p in self._pairs])
        keep = ~self.in_ledger[series]  # decided since: no longer new
        new = int((~self.in_ledger).sum())
        self.found = gathered(series[keep], place[keep], new, self.columns, lambda s: self._values(np.array([s]))[0],
                              self.missing.__getitem__)
        self._like = self.found.looks_like()
        self.marked = np.zeros(len(self.keys), dtype=bool)
        self.marked[self.found.results] = True

    # -- what the screen says -------------------------------------------------------------------
    @property
    def said(self) -> str | None:
        return self.found.said(self.ledger_name)

    def like(self, s: int) -> tuple | None:
        """The key (values, in the results' column order) of the first ledger series series ``s`` looks like."""
        at = self._like.get(s)
        return None if at is None else self.missing[at]

    def alike(self, s: int) -> int:
        """How many of the ledger's missing series series ``s`` looks like (0: none)."""
        if s not in self._like:
            return 0
        return int(self.found.alike[np.searchsorted(self.found.results, s)])

    def shown(self, s: int) -> tuple[tuple[str, ...], tuple[str, ...]] | None:
        """Series ``s``'s key values and those of the ledger series it looks like (``like``), as shown (``clean``'s
        forms, in the results' column order) and told apart where they read the same (``fitcore.text.told_apart``:
        ``cre⟨U+0300⟩me`` for ``crème``, ``East⟨U+0020⟩`` for ``East``); None where it is not a look-alike."""
        like = self.like(s)
        if like is None:
            return None
        return beside(self.keys.key_of(s).values(), like)

    def like_label(self, s: int) -> str | None:
        """The label of the ledger series series ``s`` looks like, as shown beside it (None: not a look-alike)."""
        shown = self.shown(s)
        return None if shown is None else SEPARATOR.join(shown[1])

    def differing(self, s: int) -> str | None:
        """'North': the ledger's spelling of the values series ``s`` spells otherwise (None: not a look-alike)."""
        like = self.like(s)
        return None if like is None else ledger_spelling(tuple(self.keys.key_of(s).values()), like)

    # -- asking first -------------------------------------------------------------------------
    def look_alikes(self, s: int, fresh: Iterable[dict] = ()) -> frozenset:
        """The ids of the ledger series series ``s`` looks like, with those among ``fresh`` (records found under the
        writer's lock, not yet seen) that the results do not hold; empty where ``s`` is in the ledger."""
        if self.in_ledger[s]:
            return frozenset()
        found = set()
        if s in self._like:
            mine = np.flatnonzero(np.concatenate([p[0] for p in self._pairs]) == s)
            places = np.concatenate([p[1] for p in self._pairs])[mine]
            found = {series_id(dict(zip(self.columns, self.missing[j]))) for j in places.tolist()}
        key = self.keys.key_of(s)
        names, wanted = set(self.columns), loose_key(tuple(key.values()))
        for other in fresh:
            if other == key:  # decided meanwhile: the ledger's own rules answer that
                return frozenset()
            if other.keys() == names and loose_key(tuple(other[n] for n in self.columns)) == wanted \
                    and self.keys.indices_of([other])[0] < 0:
                found.add(series_id(other))
        return frozenset(found)

    def unconfirmed(self, s: int, fresh: Iterable[dict] = ()) -> frozenset:
        """The look-alikes of series ``s`` a decision on it must be confirmed beside first (empty: none)."""
        found = self.look_alikes(s, fresh)
        return found - self.confirmed.get(series_id(self.keys.key_of(s)), frozenset())

    def confirm(self, s: int, alikes: frozenset) -> None:
        """The analyst confirmed deciding on series ``s`` beside the look-alikes ``alikes`` (those shown to them)."""
        self.confirmed[series_id(self.keys.key_of(s))] = alikes
