"""The triage session: what the screen shows and records, without any widget.

Holds the fitted series (``Results`` + ``Diagnosis``), the ledger and its
replayed statuses, and the list the analyst works through (``listing``).
Every decision goes through ``decide``, bound to what the screen showed
(``Shown``: the series by key and the ledger record last shown for it), and is
appended to the ledger at once (``deciding``; what stands on each series: ``standing``).  Pure Python and numpy, so it is tested
without a terminal.
"""
from __future__ import annotations

import shlex
from pathlib import Path

import numpy as np

from fitcore import ledger
from fitcore.arrays import integers, texts
from fitcore.data.keys import SeriesKeys
from fitcore.fit.results import Results
from fitcore.collector import collector_paused
from fitcore.ledger.replay import SeriesHistory, series_id
from fitcore.ledger.replay import apply as replayed
from fitcore.ledger.rules import what_happened
from fitcore.review.flags import CODES, SEVERITY, Diagnosis, mark_stale, without_shifted

from .deciding import Deciding, Refused, Shown
from .key_columns import KeyColumns
from .ledger_series import KeyTable, fingerprint_reader, set_statuses
from .listing import (
    FILTER_TITLES,
    FILTERS,
    KEEP,
    SORT_TITLES,
    SORTS,
    STATUS_MARK,
    STATUSES,
    ListState,
    SearchHit,
)
from .spellings import Spellings
from .standing import Standing
from .text import clean

__all__ = ["FILTERS", "FILTER_TITLES", "KEEP", "SORTS", "SORT_TITLES", "STATUS_MARK", "STATUSES", "SearchHit",
           "Refused", "Shown", "TriageSession", "describe"]


def describe(record: dict, when: bool = True) -> str:
    """'ana accepted poly1 at 14:02:11 UTC' (the ledger's own words; without the time when ``when`` is off)."""
    said = what_happened(record)
    return said if when else said.rsplit(" at ", 1)[0]


class TriageSession(Deciding, Standing, ListState):
    """State of one analyst's triage of one set of results."""

    def __init__(self, results: Results, diagnosis: Diagnosis, ledger_path: Path, who: ledger.Identity,
                 results_digest: str, key: bytes | None = None, units: dict | None = None,
                 book: ledger.Ledger | None = None, elsewhere: str | None = None) -> None:
        self.results, self.base_diagnosis = results, diagnosis
        # "RESULTS: backtested against L, not THIS" (``fitcore.ledger.elsewhere``): the file's backtest is left out
        self.elsewhere = elsewhere
        self.ledger_path, self.who, self.key, self.results_digest = Path(ledger_path), who, key, results_digest
        self.units = {k: clean(str(v)) for k, v in (units or {}).items() if v}
        self.warnings: list[str] = []
        self.unobserved: str | None = None  # why no observations will come (data file gone, changed, too large)
        self.rejects = None  # the data's rows this session's fit rejected (``Rejects``): the header and ? say them
        self.results_watch = None  # the results file opened (``ResultsWatch``): a fit replacing it is said
        # the ledger these results were fitted against (``fit --ledger``) when it is not the one this screen records
        # into (``fitcore.ledger.elsewhere.fitted_elsewhere``): the header names both while the screen is open
        self.fitted_elsewhere: str | None = None
        data = results.data
        self.keys = SeriesKeys.of(data)  # Arrow columns: no Python object per series
        self._labels: dict[int, tuple[str, ...]] = {}
        self._missing: tuple = (None, None, None)  # ``_missing_now``'s, and what it was asked of
        self.missing_changes = 0  # counts changes to ``missing_signed``: a list's labels made before are stale
        self._values: tuple = (None, None)  # (keys, their values: ``fitcore.ledger.missing.results_values``)
        self._alike_values: dict[int, dict[str, str]] = {}  # key column → its values that read alike, as shown
        _ = data.fingerprints  # computed here, in the loading worker, not on the first decision
        self._known: dict[str, int] = {}  # series id → index, for every series the ledger has named
        self._key_table = KeyTable(self.keys)  # key values → index, for the many keys of a whole ledger
        self.key_columns = KeyColumns(list(data.key_names), self.ledger_path.name)  # the ledger's series keyed so?
        self.spellings = Spellings(self.keys, self.ledger_path.name)  # series like the ledger's, spelled otherwise
        self.missing_signed: dict[str, dict] = {}  # series id → key: the ledger's signed series not in these results
        # verified in full here (or by the caller: ``book``, that ledger opened), then only its new tail
        self.book = book if book is not None else ledger.Ledger(self.ledger_path, key)
        self._applied, self._generation = 0, self.book.generation
        # (generation, records, histories) of the book when last applied intact; once it turns broken under the
        # screen, ``_kept``: the records and histories the screen goes on showing (``_keep_intact``)
        self._intact: tuple | None = None
        self._kept: tuple[list[dict], dict[str, SeriesHistory]] | None = None
        if self.book.state != ledger.INTACT:
            self.warnings.append(f"{self.ledger_path.name}: {self.book.state} ({self.book.problem}); "
                                 "decisions cannot be recorded")
        self.status = np.array(["pending"] * data.n_series, dtype=object)
        self.status_code = np.zeros(data.n_series, dtype=np.int8)  # index into STATUSES, for fast masks and counts
        self.accepted_other_mask = np.zeros(data.n_series, dtype=bool)  # (S,) ``accepted_other``, for the list
        self._with_backtest(results, diagnosis)
        self.shown: Shown | None = None
        self.news: dict | None = None  # the latest record by someone else on the highlighted series, while it stays
        self._written: set[str] = set()  # digests this screen appended
        self._mine: list[tuple[str, str]] = []  # (series id, digest) of this screen's decisions, oldest first
        self.first_fit: Results | None = None  # the series on screen, fitted before the whole data (``observe_first``)
        # how the analyst accepts the unflagged series from the shell, said where the list empties (the command line
        # gives it with the path it was run by and the results file; a session on a data file has none to name)
        self.accept_command = f"pricefold ledger accept-unflagged RESULTS --ledger {shlex.quote(str(ledger_path))}"
        self._first_rows: dict[int, int] = {}  # series → its row in ``first_fit``
        self._init_list(data.n_series)
        self.reload_ledger(force=True, pin=None)
        self._go(0)  # the first screen starts at the top row

    # -- the ledger ------------------------------------------------------------------------
    @property
    def histories(self) -> dict[str, SeriesHistory]:
        return self.book.histories if self._kept is None else self._kept[1]

    @property
    def _records(self) -> list[dict]:
        return self.book.records if self._kept is None else self._kept[0]

    def reload_ledger(self, force: bool = False, pin: str | None = "waits") -> set[int]:
        """Read decisions recorded since the last look (by anyone); the series they touched.

        The highlighted series stays listed if they take it out of the view (``pin``), and ``news`` keeps
        the latest record someone else made on it.
        """
        self.book.refresh(wait=False)  # never blocks the screen: a writer's lock means "next time"
        self._permitted = None  # asked of the OS again, once, after each read (``permitted``)
        with collector_paused():  # objects by the 100,000 beside a ledger's records: no collection passes
            return self._catch_up(force, pin)

    def _catch_up(self, force: bool = False, pin: str | None = "waits") -> set[int]:
        """Statuses for the records the ledger holds that this session has not applied yet."""
        if self._kept is None and self.book.problems and self._intact is not None:
            self._kept = self._keep_intact(*self._intact)
        seen = self._applied  # records shown before: history, never news (the same ones when read again intact)
        if self._kept is None and self.book.generation != self._generation:  # read again from the start, intact
            self._applied, self._generation, force = 0, self.book.generation, True
            self.status[:], self.status_code[:], self.accepted_other_mask[:] = "pending", 0, False
            self.key_columns.reset()
            self.spellings.reset()
            self._known.clear()  # every series looked up again, as on opening: the spellings learn the missing ones
            self.missing_signed.clear()
            self.missing_changes += 1
        everything = not self._applied  # every record: the replay has named their series already
        every = self._records
        records, fresh = every[self._applied:], every[seen:]
        self._applied = len(every)
        touched = ({sid: history.records[-1]["series"] for sid, history in self.histories.items()} if everything
                   else {series_id(r["series"]): r["series"] for r in records})
        self.key_columns.see(touched.values())
        unknown = [sid for sid in touched if sid not in self._known]
        found = self._key_table.indices_of([touched[sid] for sid in unknown])  # ints
        self._known.update(zip(unknown, found))
        if records or force:
            self._share_check()
        self._note_missing(touched)
        changed = {self._known[sid]: sid for sid in touched if self._known[sid] >= 0}
        self.spellings.see(changed, [touched[sid] for sid, at in zip(unknown, found) if at < 0])
        fingerprint = fingerprint_reader(self.results.data, len(changed))  # the column read once for both
        set_statuses(self.status, self.status_code, changed, self.histories, fingerprint)
        self.mark_accepted_other(changed, fingerprint)
        untested = bool(records) and self._untested(changed)  # decided on other data since the screen's backtest
        ids, changed = changed, set(changed)
        current = self.current
        if current is not None and fresh and self.shown is not None:  # not what was there before the screen opened
            theirs = [r for r in fresh if r.get("digest") not in self._written
                      and self._known.get(series_id(r["series"])) == current]  # others' records on it
            self.news = theirs[-1] if theirs else self.news
        if untested:
            self._with_backtest(self.results, self.base_diagnosis)
            force = True
        if self._leave_out(ids):  # what a backtest tested of a decision replaced since
            force = True
        if records or force:
            stale = self._code("stale")
            if force or not np.array_equal(stale, self.diagnosis.flagged("stale")):
                self.diagnosis = mark_stale(self.base_diagnosis, stale)
                self._flagged = self.diagnosis.raised.any(axis=1)
            self.rebuild_view(pin=pin)
        if not self.book.problems:
            self._intact = (self.book.generation, self.book.records, self.book.histories)
        return changed

    def _keep_intact(self, generation: int, records: list[dict],
                     histories: dict[str, SeriesHistory]) -> tuple[list[dict], dict[str, SeriesHistory]]:
        """The records and histories the screen goes on with once the ledger turned broken under it (or an older
        copy was put back): those it last read intact (``generation``, ``records``, ``histories``), and of a tail
        read since, the records before the first problem.  Nothing the chain refuses is applied, or told as news;
        the screen is read-only (``writable``) and says why."""
        if self.book.generation != generation:  # read again from the start: what it had stays as it was
            return records, histories
        intact = min(len(records), self.book.problem.line - 1)  # every line before the first problem is a record
        refused = records[intact:]
        if not refused:
            return records, histories
        histories, gone = dict(histories), {id(record) for record in refused}
        for sid in {series_id(record["series"]) for record in refused}:
            kept = [record for record in histories[sid].records if id(record) not in gone]
            if kept:
                histories[sid] = replayed({}, kept)[sid]
            else:
                del histories[sid]
        return records[:intact], histories

    def _untested(self, changed: dict[int, str]) -> bool:
        """Whether a series ``changed`` (index → id) now stands stale on a decision the screen's live backtest (its
        fit of the data, against this ledger) did not test: made on other data after it ran.  A results file's own
        backtest is what it is (``due.changed_since_fit`` says so); it is not run again here."""
        if self.backtest is None or not self.results.rows_loaded:
            return False
        from fitcore.ledger.backtest import Backtest  # (loaded with the backtest itself)
        if not isinstance(self.backtest, Backtest):  # a results file's own (``StoredBacktest``)
            return False
        for s, sid in changed.items():
            current = self.histories[sid].current
            if self.status[s] == "stale" and current is not None and self.backtest.decision[s] != current["digest"]:
                return True
        return False

    def _note_missing(self, touched: dict[str, dict]) -> None:
        """Keep ``missing_signed`` as records come: the ledger's series keyed by the results' columns, not in these
        results, whose standing decision signs a curve (``fitcore.ledger.missing``)."""
        from fitcore.ledger.missing import signing
        names = set(self.keys.names)
        for sid in [sid for sid in touched if self._known[sid] < 0]:
            key = touched[sid]
            before = len(self.missing_signed)
            if key.keys() == names and signing(self.histories[sid].current):
                self.missing_signed[sid] = key
            else:
                self.missing_signed.pop(sid, None)
            if len(self.missing_signed) != before:  # a label may read like one: told apart again
                self._labels.clear()
                self.missing_changes += 1

    @property
    def missing(self):
        """``fitcore.ledger.missing.Missing`` of the ledger's signed series these results do not hold (none where
        none of its series is: the header says that instead), told which are look-alikes' ledger spellings."""
        from fitcore.ledger.missing import NONE
        if not self.missing_signed or self.key_columns.said is not None:
            return NONE
        return self._missing_now()[1]

    def _missing_now(self) -> tuple:
        """``(asked, Missing, told)``, made again only when the missing series or the keys changed: the
        ``Missing`` (the look-alikes' ledger spellings said as such, decided or not) and ``told``, a key told
        apart from those series' keys (``fitcore.text.told_apart_from``)."""
        from fitcore.ledger.missing import Missing, results_values
        from fitcore.text import told_apart_from
        asked = (self.keys, self.missing_changes)
        if self._missing[0] != asked:
            if self._values[0] is not self.keys:  # every results' series' values: made once for these keys
                self._values = (self.keys, results_values(self.keys))
            gone = Missing(tuple(self.missing_signed.values()), True, tuple(self.keys.names))
            gone = gone.beside(self._values[1]) if len(gone) else gone
            self._missing = (asked, gone, told_apart_from(gone.shown()))
        return self._missing

    def _share_check(self) -> None:
        """Whether any of the ledger's series is in these results (the first one found ends the look; only when
        none is, its series keyed by the results' columns are counted, for ``key_columns.unshared``)."""
        shared = self.key_columns.mismatch is not None or any(self._known.get(sid, -1) >= 0 for sid in self.histories)
        columns = set(self.key_columns.columns)
        same = 0 if shared else sum(h.records[-1]["series"].keys() == columns for h in self.histories.values())
        self.key_columns.share(shared, same)

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
        self.accepted_other_mask = self.accepted_other_mask[inverse]
        self.view = perm[self.view]
        if self.pinned is not None:
            self.pinned = int(perm[self.pinned])
        self._known = {sid: int(perm[s]) if s >= 0 else -1 for sid, s in self._known.items()}
        self.keys, self._labels, self._search, self._key_table = fresh, {}, None, KeyTable(fresh)
        confirmed, self.spellings = self.spellings.confirmed, Spellings(fresh, self.ledger_path.name)
        self.spellings.confirmed = confirmed  # by series id: the same series in any order
        self.spellings.see((at for at in self._known.values() if at >= 0),
                           (self.histories[sid].latest["series"] for sid, at in self._known.items()
                            if at < 0 and sid in self.histories))
        self.results, self.first_fit, self._first_rows = results, None, {}
        # these results' proposals, asked again of every series the ledger names (in the fit's order)
        self.mark_accepted_other({at: sid for sid, at in self._known.items() if at >= 0})
        self._with_backtest(results, diagnosis)
        # Records another analyst made meanwhile may take the highlighted series out of the list: as on any
        # reload the analyst did not ask for, it stays listed and decision keys wait until they move.
        self.reload_ledger(force=True, pin="waits")
        if self.shown is not None:
            self.look(self.index_of(self.shown))
        return True

    def observe_first(self, results: Results, series) -> int:
        """Keep a fit of a few series (those around the cursor) made before the whole data are fitted, so
        their observations can be drawn already.  The same engine on the same rows gives the whole fit's
        numbers; a series is kept only if its rows are the ones these results were fitted on (fingerprints
        equal).  Returns how many were kept; nothing once the whole fit is in."""
        if self.results.rows_loaded:
            return 0
        data = self.results.data
        rows = {int(s): i for i, s in enumerate(series)
                if results.data.fingerprint_of(i) == data.fingerprint_of(int(s))}
        self.first_fit, self._first_rows = results, rows
        return len(rows)

    def observed(self, s: int) -> tuple[Results, int]:
        """Where series ``s``'s observations are: ``(results, index)`` — the results themselves once their
        rows are loaded, else the fit of the series on screen made first when it holds ``s``."""
        if not self.results.rows_loaded and s in self._first_rows:
            return self.first_fit, self._first_rows[s]
        return self.results, s

    def _with_backtest(self, results: Results, diagnosis: Diagnosis) -> None:
        """Signed curves against the rows since sign-off (``fitcore.ledger.backtest``): the ``shifted``
        flag joins the results' flags, and ``backtest`` holds the numbers (None: nothing to test).  A results
        file's own backtest made against another ledger (``elsewhere``) is left out with its ``shifted`` flags,
        as ``show --ledger`` leaves it out; a fit of the data is backtested here, against this ledger.  What it
        tested of a decision that no longer stands is left out as the ledger is read (``_leave_out``)."""
        self.base_diagnosis, self.backtest, self._tested = diagnosis, None, None
        if self.elsewhere is not None and not results.rows_loaded:
            self.base_diagnosis = without_shifted(diagnosis)
        # a results file holds the backtest it was fitted with, or none: then its module is not imported (not
        # before the list's first frame)
        elif results.rows_loaded or getattr(results, "stored_backtest", None) is not None:
            from fitcore.ledger.backtest import cycle_of
            source = {"path": str(self.ledger_path), "head": self.book.head_text, "state": self.book.state}
            self.base_diagnosis, self.backtest = cycle_of(results, diagnosis, self.histories, source)
            if self.backtest is not None:  # as tested, and the series left out of it (none yet)
                self._tested = (self.base_diagnosis, self.backtest, np.zeros(results.n_series, dtype=bool))
        self.diagnosis = self.base_diagnosis
        self._flagged = self.diagnosis.raised.any(axis=1)

    def _leave_out(self, changed: dict[int, str]) -> bool:
        """Leave out the backtest — its numbers and ``shifted`` flag — of each series ``changed`` (index → id)
        whose tested decision no longer stands (decided here or by another analyst since), and take it back where
        that decision stands again (a revoke of what replaced it), as a screen opened now, ``show --ledger`` and
        the report do (``backtest.superseded_in``).  Only series that were tested are asked.  Whether any changed."""
        if self._tested is None or not changed:
            return False
        diagnosis, found, left_out = self._tested
        at = np.fromiter(changed, dtype=np.int64, count=len(changed))
        at = at[np.not_equal(found.decision[at], None)]
        if not at.size:
            return False
        from fitcore.ledger.backtest import superseded_in
        histories = self.histories
        currents = [history.current if (history := histories.get(changed[s])) is not None else None
                    for s in at.tolist()]
        gone = superseded_in(found, currents, at)
        if np.array_equal(gone, left_out[at]):
            return False
        left_out[at] = gone
        self.base_diagnosis, self.backtest = without_shifted(diagnosis, left_out), found.without(left_out)
        return True

    def backtest_of(self, s: int) -> dict | None:
        """Series ``s``'s backtest (``Backtest.record``): None when nothing was tested."""
        return self.backtest.record(s) if self.backtest is not None else None

    def _id(self, s: int) -> str:
        return series_id(self.keys.key_of(s))

    def index_of(self, shown: Shown) -> int:
        """Where the shown series is now (the results may have been swapped for a fit of the data)."""
        s = shown.series
        if 0 <= s < self.results.n_series and self._id(s) == shown.sid:
            return s
        return int(self.keys.indices_of([shown.key])[0])

    def label_parts(self, s: int) -> tuple[str, ...]:
        """Series ``s``'s key values, product first, safe to print (made on demand: the list draws a screenful); a
        look-alike of a ledger series told apart from that series' spelling (``Spellings.shown``)."""
        alike = self.spellings.shown(s)
        if alike is not None:
            return alike[0]
        parts = self._labels.get(s)
        if parts is None:
            if len(self._labels) > 4096:
                self._labels.clear()
            parts = tuple(clean(self.keys.columns[n][s].as_py() or "") for n in self.keys.names)
            if self.missing_signed and self.key_columns.said is None:  # apart from those the header names missing
                parts = self._missing_now()[2](parts)
            self._labels[s] = parts
        return parts

    def label(self, s: int) -> str:
        """Series ``s``'s key for a dialog or a notification: a part that reads like another value of its column
        (``café`` decomposed beside ``café`` composed; ``East `` beside ``East``) shown as the list shows it beside
        that value (``fitcore.text.told_apart``), so a decision's words name the one series on screen."""
        from fitcore.data.keys import SEPARATOR
        parts = self.label_parts(s)
        return SEPARATOR.join(self._told_apart(i).get(part, part) for i, part in enumerate(parts))

    def _told_apart(self, i: int) -> dict[str, str]:
        """Key column ``i``'s shown values that read like another of its values, each as ``told_apart`` shows it:
        made once a column, when a dialog first names a series (the column's distinct values, not one a series)."""
        found = self._alike_values.get(i)
        if found is None:
            from fitcore.text import told_apart
            column = self.keys.columns[self.keys.names[i]]
            values = [(clean(value or ""),) for value in column.unique().to_pylist()]
            found = {value: shown for (value,), (shown,) in zip(values, told_apart(values)) if shown != value}
            self._alike_values[i] = found
        return found

    # -- what the screen shows, and deciding on it -------------------------------------------
    def _cursor_changed(self) -> None:
        """The highlighted row is on screen at once (the evidence follows): keys act on it from now."""
        current = self.current
        if self.shown is None or self.shown.series != current:
            self.look(current)

    def look(self, s: int | None) -> Shown | None:
        """Record that the screen now shows series ``s`` (None: nothing); decisions act on it."""
        if s is None or s < 0:
            self.shown = None
            return None
        if self.shown is None or self.shown.series != s:
            self.news = None
        records = self.history(s)
        chosen, model = int(self.results.chosen[s]), self.model_of(s)
        names = self.results.names
        self.shown = Shown(series=s, sid=self._id(s), key=self.keys.key_of(s),
                           fingerprint=self.results.data.fingerprint_of(s),
                           latest=records[-1].get("digest") if records else None, flags=self.result_flags(s),
                           proposed=names[chosen] if chosen >= 0 else None, model=names[model] if model >= 0 else None)
        return self.shown

    def last_date(self, s: int) -> str | None:
        """The last date of series ``s``'s rows ("YYYY-MM-DD"; None without dates): the ledger refuses a decision
        on data older than the standing decision's (``rules.newer_standing``)."""
        stored = getattr(self.results, "stored_last_date", None)
        if stored is not None:
            day = stored[s]
        else:
            data = self.results.data
            if data.date is None or not self.results.rows_loaded or data.counts[s] == 0:
                return None
            day = data.date[data.offsets[s]:data.offsets[s + 1]].max().astype("datetime64[D]")
        return None if np.isnat(day) else str(day)

    def result_flags(self, s: int) -> tuple[str, ...]:
        """The flags the results raise on series ``s`` (not ``stale``, which comes from the ledger)."""
        raised = self.base_diagnosis.raised[s]
        return tuple(code for i, code in enumerate(CODES) if raised[i])

    # -- one line of the list ------------------------------------------------------------
    def flag_codes(self, s: int) -> list[str]:
        """The flags of series ``s``, stop flags first."""
        codes = [code for i, code in enumerate(CODES) if self.diagnosis.raised[s, i]]
        return sorted(codes, key=lambda code: SEVERITY[code] != "stop")

    def severity(self, s: int, codes: list[str] | None = None) -> str | None:
        """The worst of series ``s``'s flags (``codes``, stop first: else the results' ``flag_codes``)."""
        codes = self.flag_codes(s) if codes is None else codes
        return None if not codes else "stop" if SEVERITY[codes[0]] == "stop" else "warn"

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
