"""The list an analyst works through: a filtered, sorted view of series indices and a cursor.

A view is rebuilt whenever statuses change; the cursor follows its series, not its
position.  When a reload the analyst did not ask for (another analyst's decision, the
ledger poll) would take the highlighted series out of the view, it stays listed —
*pinned* — until the cursor leaves it, and ``waiting`` says decision keys should wait
for the analyst to move.  A series brought back on purpose (``bring``: undo, search)
is pinned the same way but does not wait.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fitcore.review.flags import CODES
from fitcore.text import original, printable

FILTERS = ("attention", "all", "pending", "held", "decided", "changed", "shifted", "spelled")
# "undecided": no decision stands on the current data, i.e. the statuses pending and stale together (the
# header counts those two apart; the choice named "pending" lists both, and its title says so)
FILTER_TITLES = {"attention": "needs a decision", "all": "all series",
                 "pending": "undecided: pending or stale",
                 "held": "held", "decided": "decided or held", "changed": "changed since sign-off",
                 "shifted": "shifted since sign-off", "spelled": "≈ spelled like a ledger series otherwise"}
SORTS = ("attention", "key", "score", "n")
SORT_TITLES = {"attention": "attention", "key": "key", "score": "lowest score", "n": "fewest observations"}
STATUS_MARK = {"pending": "·", "accepted": "✓", "overridden": "↺", "held": "‖", "stale": "!"}
STATUSES = tuple(STATUS_MARK)
KEEP = "keep"  # set_filter: leave this part of the filter as it is


@dataclass(frozen=True)
class SearchHit:
    """What a search found: matches in the view and in all series; ``switched`` when the view changed to show one;
    ``exact``: of those in the view, how many match in the Unicode form typed (visited first)."""

    in_view: int
    overall: int
    switched: bool
    exact: int = 0

    @property
    def found(self) -> bool:
        return self.overall > 0


class ListState:
    """The list part of a triage session.  Uses the session's ``results``, ``diagnosis``, ``keys``,
    ``status_code``, ``_flagged``, ``accepted_other_mask``, ``spellings`` and ``accept_command``; ``_init_list``
    must run before the first ``rebuild_view``."""

    def _init_list(self, n_series: int) -> None:
        self.filter, self.sort, self.flag_filter = "attention", "attention", None
        self.view = np.arange(n_series)
        self.cursor = 0
        self.pinned: int | None = None  # a series listed though the filter leaves it out
        self.pin_waits = False  # pinned because a reload took it out: decision keys wait for a move
        self._search: tuple[str, np.ndarray] | None = None

    @property
    def current(self) -> int | None:
        return int(self.view[self.cursor]) if len(self.view) else None

    @property
    def waiting(self) -> bool:
        """The highlighted series left the list under the cursor: nothing acts on it until the analyst moves."""
        return self.pin_waits and self.pinned is not None and self.pinned == self.current

    # -- which series are listed ---------------------------------------------------------
    def _code(self, status: str) -> np.ndarray:
        return self.status_code == STATUSES.index(status)

    @property
    def undecided(self) -> np.ndarray:
        """(S,) pending or stale: no decision stands on the current data."""
        return self._code("pending") | self._code("stale")

    def needs_attention(self) -> np.ndarray:
        """(S,) undecided, and flagged or a look-alike (``≈``: a decision on it records a new series beside a
        ledger series these results do not hold; look-alikes are new to the ledger, so undecided); or accepted
        as a model these results do not propose (``accepted_other``: an accept made on another fit of the same
        data), which needs a look until this proposal is accepted in its place or another decision stands."""
        return ((self._flagged | self.spellings.marked) & self.undecided) | self.accepted_other_mask

    def status_mask(self, name: str) -> np.ndarray:
        if name == "attention":
            return self.needs_attention()
        if name == "pending":
            return self.undecided
        if name == "held":
            return self._code("held")
        if name == "decided":
            return ~self.undecided
        if name == "changed":  # signed, and the data changed since: stale until carried or decided again
            return self._code("stale")
        if name == "shifted":
            return self.diagnosis.flagged("shifted").copy()
        if name == "spelled":
            return self.spellings.marked.copy()
        return np.ones(self.results.n_series, dtype=bool)

    def _mask(self, name: str, flag: str | None) -> np.ndarray:
        mask = self.status_mask(name)
        return mask & self.listed_raised()[:, CODES.index(flag)] if flag else mask

    def empty_words(self) -> list[str]:
        """What the list says where it lists nothing, a sentence an item: why, and where the series are (the
        evidence panel, beside it, is off screen in a narrow terminal); where series no decision stands on carry no
        flag, the command that accepts them together, with this screen's results and ledger (``accept_command``):
        a trial's two cycles ended on "Nothing listed" with 27, then 4, of them pending, and nothing said how."""
        # what accept-unflagged accepts: no flag, no decision standing (a stale series' stands), no look-alike left
        unflagged = int(np.count_nonzero(self._code("pending") & ~self._flagged & ~self.spellings.marked))
        undecided = int(np.count_nonzero(self.undecided))
        if self.filter == "attention" and self.flag_filter is None and undecided:
            said = [f"Nothing needs a decision: {undecided:,} undecided series carry no flag.",
                    f"f: all {self.results.n_series:,} series."]
        else:
            said = ["Nothing listed here: f for another view, / to search."]
            if unflagged:
                said.append(f"{unflagged:,} pending series carr{'ies' if unflagged == 1 else 'y'} no flag.")
        if unflagged:
            said.append(("To accept its proposal" if unflagged == 1 else "To accept them together, each its proposal, "
                         "in one batch") + f": {printable(self.accept_command)}")
        return said

    def filter_counts(self) -> dict[str, int]:
        """How many series each choice of the filter menu would list (a flag keeps the status filter, and back)."""
        out = {name: int(self._mask(name, self.flag_filter).sum()) for name in FILTERS}
        status = self.status_mask(self.filter)
        out["flag:"] = int(status.sum())
        raised = self.listed_raised()  # (the flags the rows show)
        for i, code in enumerate(CODES):
            out[f"flag:{code}"] = int(np.count_nonzero(status & raised[:, i]))
        return out

    def rebuild_view(self, keep: int | None = None, pin: str | None = None) -> None:
        """Re-filter and re-sort, the cursor on series ``keep`` (default: the current one) if listed.

        ``pin``: ``"waits"`` (a reload the analyst did not ask for) or ``"brought"`` keeps ``keep`` listed even
        if the filter leaves it out; without it the cursor keeps its position when ``keep`` is gone.
        """
        keep = self.current if keep is None else keep
        mask = self._mask(self.filter, self.flag_filter)
        if self.pinned is not None and self.pinned != keep:
            self.pinned, self.pin_waits = None, False
        if pin and keep is not None and keep >= 0 and not mask[keep] and self.pinned != keep:
            self.pinned, self.pin_waits = keep, pin == "waits"
        if self.pinned is not None:
            if mask[self.pinned]:  # listed again on its own merits
                self.pinned, self.pin_waits = None, False
            else:
                mask[self.pinned] = True
        order = self._order()
        self.view = order[mask[order]]
        where = np.flatnonzero(self.view == keep) if keep is not None else []
        self.cursor = int(where[0]) if len(where) else min(self.cursor, max(len(self.view) - 1, 0))
        self._cursor_changed()

    def _cursor_changed(self) -> None:
        """Called whenever the cursor may have moved to another series (a session keeps ``shown`` in step)."""

    def listed_scores(self) -> np.ndarray:
        """(S,) the score each series' row shows (a session: ``Standing.listed_scores``)."""
        return np.asarray(self.results.score, dtype=float)

    def listed_attention(self) -> np.ndarray:
        """Series in attention order by the flags the rows show (a session: ``Standing.listed_attention``)."""
        return self.diagnosis.attention_order()

    def _order(self) -> np.ndarray:
        if self.sort == "key":
            return self.keys.sorted_order()
        if self.sort == "score":  # the score the list shows (the model that stands), not always the proposal's
            score = self.listed_scores()
            return np.argsort(np.where(np.isnan(score), -np.inf, score), kind="stable")
        if self.sort == "n":
            return np.argsort(self.results.data.counts, kind="stable")
        return self.listed_attention()

    def set_filter(self, name: str = KEEP, flag: str | None = KEEP) -> None:
        """Change the status filter, the flag filter (None: any), or both; ``KEEP`` leaves one as it is."""
        name = self.filter if name == KEEP else name
        flag = self.flag_filter if flag == KEEP else flag
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

    # -- moving ----------------------------------------------------------------------------
    def _go(self, position: int) -> None:
        """Put the cursor at ``position``; leaving a pinned series lets it go from the list."""
        if not len(self.view):
            return
        self.cursor = int(np.clip(position, 0, len(self.view) - 1))
        if self.pinned is not None and self.current != self.pinned:
            self.rebuild_view(keep=self.current)
        self._cursor_changed()

    def move(self, step: int) -> None:
        self._go(self.cursor + step)

    def bring(self, s: int) -> None:
        """Put the cursor on series ``s``, listing it even if the filter leaves it out (the analyst asked)."""
        self.rebuild_view(keep=s, pin="brought")
        if self.pinned == s:
            self.pin_waits = False

    def jump_attention(self, step: int) -> bool:
        """Move to the next (step 1) or previous (-1) listed series that needs attention."""
        positions = np.flatnonzero(self.needs_attention()[self.view])
        if not len(positions):
            return False
        later = positions[positions > self.cursor] if step > 0 else positions[positions < self.cursor][::-1]
        self._go(int(later[0] if len(later) else positions[0] if step > 0 else positions[-1]))
        return True

    def after_decision(self, s: int, before: np.ndarray | None = None) -> None:
        """Rebuild the list and put the cursor on the next row after ``s``: in the attention view, the next
        series needing attention; in any other (all series, pending, …) simply the next row, as a user
        working down that list expects.  ``before``: the view the decision was made in (the decision's own
        reload re-sorts the list: an override moves by its own curve's flags and score)."""
        view = self.view if before is None else before
        at = np.flatnonzero(view == s)
        position = int(at[0]) if before is not None and len(at) else self.cursor
        # the series that came after ``s`` before the list was re-sorted (its status changed, so it may move);
        # where ``s`` has left the view already, the one that took its row
        after = [int(x) for x in view[(int(at[0]) + 1 if len(at) else position):] if x != s]
        self.rebuild_view(keep=-1)
        listed = np.flatnonzero(self.view == after[0]) if after else []
        self._go(int(listed[0]) if len(listed) else min(position, max(len(self.view) - 1, 0)))
        if len(self.view) and self.view[self.cursor] == s:
            self.move(1)
        if self.filter != "attention":
            return
        attention = self.needs_attention()[self.view]
        if len(self.view) and not attention[self.cursor]:
            self.jump_attention(1)

    def search(self, text: str) -> SearchHit:
        """Move to the next series after the cursor whose key contains ``text`` (ignoring case), wrapping: first
        those that hold it in the Unicode form typed (``cafe⟨U+0301⟩``, as the list shows a decomposed name, finds
        that series before the composed ``café``), then those that hold it in another form.

        Looks through every series: when none of the listed ones match, the view switches to all series.
        """
        needle = text.strip()
        if not needle:
            return SearchHit(0, 0, False)
        if self._search is None or self._search[0] != needle.casefold():
            exact = self.keys.matching(needle, forms=False)
            every = exact if original(needle).isascii() else self.keys.matching(needle)
            self._search = (needle.casefold(), exact, every)
        exact, matches = self._search[1], self._search[2]
        overall = int(matches.sum())
        positions = np.flatnonzero(matches[self.view])
        switched = False
        if overall and not len(positions):
            self.filter, self.flag_filter, switched = "all", None, True
            self.rebuild_view()
            positions = np.flatnonzero(matches[self.view])
        first = exact[self.view[positions]]
        order = np.concatenate([positions[first], positions[~first]])  # the form typed first, each in list order
        if len(order):
            here = np.flatnonzero(order == self.cursor)
            if len(here):  # on a match: the next in that order
                self._go(int(order[(here[0] + 1) % len(order)]))
            else:  # elsewhere: the next below the cursor, among those of the form typed if any are listed
                tier = order[:int(first.sum())] if first.any() else order
                later = tier[tier > self.cursor]
                self._go(int(later[0] if len(later) else tier.min()))
        return SearchHit(len(positions) if not switched else 0, overall, switched, int(first.sum()))
