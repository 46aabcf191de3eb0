"""The triage session: what the screen shows and records, without any widget.

Holds the fitted series (``Results`` + ``Diagnosis``), the ledger and its
replayed statuses, and the list the analyst works through (a filtered,
sorted view of series indices).  Every decision is appended to the ledger at
once.  Pure Python and numpy, so it is tested without a terminal.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from fitcore import ledger
from fitcore.arrays import integers, texts
from fitcore.data.keys import SeriesKeys
from fitcore.fit.results import Results
from fitcore.ledger.replay import SeriesHistory, own_standing, series_id
from fitcore.review.flags import CODES, SEVERITY, Diagnosis, mark_stale

from .text import clean

FILTERS = ("attention", "all", "pending", "decided")
FILTER_TITLES = {"attention": "needs attention, pending", "all": "all series", "pending": "pending",
                 "decided": "decided"}
SORTS = ("attention", "key", "score", "n")
SORT_TITLES = {"attention": "attention", "key": "key", "score": "lowest score", "n": "fewest observations"}
STATUS_MARK = {"pending": "·", "accepted": "✓", "overridden": "↺", "held": "‖", "stale": "!"}
STATUSES = tuple(STATUS_MARK)


class TriageSession:
    """State of one analyst's triage of one set of results."""

    def __init__(self, results: Results, diagnosis: Diagnosis, ledger_path: Path, who: ledger.Identity,
                 results_digest: str, key: bytes | None = None) -> None:
        self.results, self.base_diagnosis = results, diagnosis
        self.ledger_path, self.who, self.key, self.results_digest = Path(ledger_path), who, key, results_digest
        self.warnings: list[str] = []
        data = results.data
        self.keys = SeriesKeys.of(data)  # Arrow columns: no Python object per series
        self._labels: dict[int, str] = {}
        _ = data.fingerprints  # computed here, in the loading worker, not on the first decision
        self._known: dict[str, int] = {}  # series id → index, for every series the ledger has named
        self._search: tuple[str, np.ndarray] | None = None
        self.book = ledger.Ledger(self.ledger_path, key)  # verified in full here, then only its new tail
        self._applied, self._generation = 0, self.book.generation
        if self.book.state != ledger.INTACT:
            self.warnings.append(f"{self.ledger_path.name}: {self.book.state} ({self.book.problem}); "
                                 "decisions cannot be recorded")
        self.status = np.array(["pending"] * data.n_series, dtype=object)
        self.status_code = np.zeros(data.n_series, dtype=np.int8)  # index into STATUSES, for fast masks and counts
        self.diagnosis = diagnosis
        self._flagged = diagnosis.raised.any(axis=1)
        self.filter, self.sort, self.flag_filter = "attention", "attention", None
        self.view = np.arange(data.n_series)
        self.cursor = 0
        self.reload_ledger(force=True)

    # -- the ledger ------------------------------------------------------------------------
    @property
    def histories(self) -> dict[str, SeriesHistory]:
        return self.book.histories

    def reload_ledger(self, force: bool = False) -> bool:
        """Read decisions recorded since the last look (by anyone); True when something changed."""
        self.book.refresh(wait=False)  # never blocks the screen: a writer's lock means "next time"
        return self._catch_up(force)

    def _catch_up(self, force: bool = False) -> bool:
        """Statuses for the records the ledger holds that this session has not applied yet."""
        if self.book.generation != self._generation:  # the file was read again from the start
            self._applied, self._generation, force = 0, self.book.generation, True
            self.status[:], self.status_code[:] = "pending", 0
        records = self.book.records[self._applied:]
        self._applied = len(self.book.records)
        touched = {series_id(r["series"]): r["series"] for r in records}
        new = [sid for sid in touched if sid not in self._known]
        for sid, s in zip(new, self.keys.indices_of([touched[sid] for sid in new])):
            self._known[sid] = int(s)
        for sid in touched:
            if self._known[sid] >= 0:
                self._refresh_status(self._known[sid])
        if records or force:
            stale = self.status_code == STATUSES.index("stale")
            if force or not np.array_equal(stale, self.diagnosis.flagged("stale")):
                self.diagnosis = mark_stale(self.base_diagnosis, stale)
                self._flagged = self.diagnosis.raised.any(axis=1)
            self.rebuild_view()
        return bool(records)

    def upgrade(self, results: Results, diagnosis: Diagnosis) -> bool:
        """Swap in a fit of the data for results read back from a file (observations, bands).

        The fit may list the series in another order (a results folder is written partition by
        partition): statuses, the list and the cursor follow each series.  Only when it holds the same
        series with the same rows (fingerprints equal); False otherwise, and nothing changes.
        """
        old, new = self.results.data, results.data
        if old.n_series != new.n_series:
            return False
        fresh = SeriesKeys.of(new)
        perm = fresh.positions_of(self.keys)  # old index → new index
        if (perm < 0).any() or not _same_text(fingerprint_array(old), fingerprint_array(new).take(integers(perm))):
            return False
        inverse = np.empty_like(perm)
        inverse[perm] = np.arange(len(perm))
        self.status, self.status_code = self.status[inverse], self.status_code[inverse]
        self.view = perm[self.view]
        self._known = {sid: int(perm[s]) if s >= 0 else -1 for sid, s in self._known.items()}
        self.keys, self._labels, self._search = fresh, {}, None
        self.results, self.base_diagnosis = results, diagnosis
        self.reload_ledger(force=True)
        return True

    def _id(self, s: int) -> str:
        return series_id(self.keys.key_of(s))

    def label(self, s: int) -> str:
        """Series ``s``'s key as one line, safe to print (made on demand: the list draws a screenful)."""
        text = self._labels.get(s)
        if text is None:
            if len(self._labels) > 4096:
                self._labels.clear()
            text = self._labels[s] = clean(self.keys.label(s))
        return text

    def _refresh_status(self, s: int) -> None:
        history = self.histories.get(self._id(s))
        self.status[s] = history.status(self.results.data.fingerprint_of(s)) if history else "pending"
        self.status_code[s] = STATUSES.index(self.status[s])

    def history(self, s: int) -> list[dict]:
        history = self.histories.get(self._id(s))
        return history.records if history else []

    def can_withdraw(self, s: int) -> bool:
        return own_standing(self.histories.get(self._id(s)), self.who.analyst, self.who.os_user) is not None

    def record(self, s: int, action: str, model: str | None = None, note: str = "") -> None:
        """Append one decision on series ``s`` to the ledger (raises ``LedgerError`` with a one-line reason)."""
        chosen = self.results.chosen[s]
        proposed = self.results.names[chosen] if chosen >= 0 else None
        if action == "accept":
            model = proposed
        latest = self.histories[self._id(s)].latest if self._id(s) in self.histories else None
        flags = [code for i, code in enumerate(CODES) if self.base_diagnosis.raised[s, i]]  # from the results
        entry = ledger.Entry(series=self.keys.key_of(s), action=action,
                             fingerprint=self.results.data.fingerprint_of(s), results=self.results_digest,
                             model=model, proposed=proposed, note=note,
                             supersedes=latest["digest"] if latest else None, flags=flags)
        self._known[self._id(s)] = s
        try:
            self.book.append([entry], self.who)
        finally:  # a refused decision may still have read other analysts' records
            self._catch_up()

    # -- the list --------------------------------------------------------------------------
    @property
    def current(self) -> int | None:
        return int(self.view[self.cursor]) if len(self.view) else None

    @property
    def undecided(self) -> np.ndarray:
        """(S,) pending or stale: no decision stands on the current data."""
        return (self.status_code == STATUSES.index("pending")) | (self.status_code == STATUSES.index("stale"))

    def needs_attention(self) -> np.ndarray:
        return self._flagged & self.undecided

    def rebuild_view(self, keep: int | None = None) -> None:
        """Re-filter and re-sort; keep the cursor on series ``keep`` (default: the current one) if still listed."""
        keep = self.current if keep is None else keep
        n_series = self.results.n_series
        if self.filter == "attention":
            mask = self.needs_attention()
        elif self.filter == "pending":
            mask = self.undecided
        elif self.filter == "decided":
            mask = ~self.undecided
        else:
            mask = np.ones(n_series, dtype=bool)
        if self.flag_filter:
            mask &= self.diagnosis.flagged(self.flag_filter)
        order = self._order()
        self.view = order[mask[order]]
        where = np.flatnonzero(self.view == keep) if keep is not None else []
        self.cursor = int(where[0]) if len(where) else min(self.cursor, max(len(self.view) - 1, 0))

    def _order(self) -> np.ndarray:
        if self.sort == "key":
            return self.keys.sorted_order()
        if self.sort == "score":
            score = np.where(np.isnan(self.results.score), -np.inf, self.results.score)
            return np.argsort(score, kind="stable")
        if self.sort == "n":
            return np.argsort(self.results.data.counts, kind="stable")
        return self.diagnosis.attention_order()

    def set_filter(self, name: str, flag: str | None = None) -> None:
        if name not in FILTERS:
            raise ValueError(f"expected a filter among {FILTERS}, got {name!r}")
        if flag is not None and flag not in CODES:
            raise ValueError(f"expected a flag among {CODES}, got {flag!r}")
        self.filter, self.flag_filter = name, flag
        self.rebuild_view()

    def set_sort(self, name: str) -> None:
        if name not in SORTS:
            raise ValueError(f"expected a sort among {SORTS}, got {name!r}")
        self.sort = name
        self.rebuild_view()

    def move(self, step: int) -> None:
        if len(self.view):
            self.cursor = int(np.clip(self.cursor + step, 0, len(self.view) - 1))

    def jump_attention(self, step: int) -> bool:
        """Move to the next (step 1) or previous (-1) listed series that needs attention."""
        attention = self.needs_attention()[self.view]
        positions = np.flatnonzero(attention)
        if not len(positions):
            return False
        later = positions[positions > self.cursor] if step > 0 else positions[positions < self.cursor][::-1]
        target = later[0] if len(later) else positions[0] if step > 0 else positions[-1]
        self.cursor = int(target)
        return True

    def after_decision(self, s: int) -> None:
        """Rebuild the list and put the cursor on the next series needing attention after ``s``."""
        position = self.cursor
        self.rebuild_view(keep=-1)
        self.cursor = min(position, max(len(self.view) - 1, 0))
        if len(self.view) and self.view[self.cursor] == s:
            self.move(1)
        attention = self.needs_attention()[self.view]
        if len(self.view) and not attention[self.cursor]:
            self.jump_attention(1)

    def search(self, text: str, start_after: bool = True) -> bool:
        """Move to the next listed series whose key contains ``text`` (case-insensitive)."""
        needle = text.strip()
        if not needle or not len(self.view):
            return False
        if self._search is None or self._search[0] != needle.casefold():
            self._search = (needle.casefold(), self.keys.matching(needle))
        positions = np.flatnonzero(self._search[1][self.view])
        if not len(positions):
            return False
        begin = self.cursor + 1 if start_after else self.cursor
        later = positions[positions >= begin]
        self.cursor = int(later[0] if len(later) else positions[0])
        return True

    # -- one line of the list ------------------------------------------------------------
    def flag_codes(self, s: int) -> list[str]:
        return [code for i, code in enumerate(CODES) if self.diagnosis.raised[s, i]]

    def severity(self, s: int) -> str | None:
        codes = self.flag_codes(s)
        if any(SEVERITY[c] == "stop" for c in codes):
            return "stop"
        return "warn" if codes else None

    def counts(self) -> dict[str, int]:
        tally = np.bincount(self.status_code, minlength=len(STATUSES))
        out = dict(zip(STATUSES, tally.tolist()))
        out["attention"] = int(self.needs_attention().sum())
        return out


def fingerprint_array(data):
    """A dataset's fingerprints as Arrow text (results read back from a file already hold them so)."""
    return data.fingerprints if not isinstance(data.fingerprints, list) else texts(data.fingerprints)


def _same_text(a, b) -> bool:
    import pyarrow.compute as pc
    return len(a) == len(b) and bool(pc.all(pc.equal(a, b)).as_py() if len(a) else True)
