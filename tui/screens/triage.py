"""The triage screen: the series list beside the evidence for the highlighted series.

Every decision key acts on the series the screen shows (``session.shown``, set whenever the
cursor lands on a series or the screen redraws it), never on a list position, and goes through
``TriageSession.decide``; the dialogs a decision passes on the way are ``DecisionFlow``'s (decision_flow.py).
"""
from __future__ import annotations

import time

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.screen import Screen
from textual.widgets import Static

from fitcore.errors import PricefoldError
from fitcore.review.flags import CODES

from ..help import help_text
from ..session import (
    FILTER_TITLES,
    FILTERS,
    KEEP,
    SORT_TITLES,
    SORTS,
    TriageSession,
    describe,
)
from ..text import clean, printable
from ..widgets.evidence import EvidencePanel
from ..widgets.key_line import KeyLine
from ..widgets.series_list import SeriesList
from ..widgets.status_line import (
    fitted_text,
    keys_text,
    missing_text,
    rejected_text,
    spellings_text,
    status_text,
)
from .decision_flow import DecisionFlow
from .dialogs import LOST_WITHIN, ChoiceDialog, MessageDialog, TextDialog

NARROW = 110  # below this many columns, show the list or the evidence, not both
# Side by side, the evidence keeps EVIDENCE_LEAST cells (its title and charts whole) and the list takes up to
# LIST_ROOM cells before the two share the width evenly (at 120–130 columns names were cut beside an evidence
# pane with room to spare)
EVIDENCE_LEAST, LIST_ROOM = 52, 70
POLL_SECONDS = 2.0
# a decision key this soon after its series came up is not done: the evidence cannot have been read (a key typed
# twice, or held down, accepted the next series too, 4 ms later); ``conftest`` sets 0 for the tests' pilots
SETTLE_SECONDS = 0.4
# longer for a series the cursor moved to because of a decision: an accept that asks for no note, then a sentence
# typed as its note, signed the next series with the sentence's first letter 0.6 s later (a trial)
AFTER_DECISION_SECONDS = 1.5


class TriageScreen(DecisionFlow, Screen):
    BINDINGS = [
        Binding("a", "accept", "accept"),
        Binding("o", "override", "override"),
        Binding("o", "nothing_to_override", "override", show=False),  # the same key, to say why there is nothing
        Binding("n", "note", "note"),
        Binding("h", "hold", "hold"),
        Binding("u", "revoke", "revoke"),
        Binding("u", "nothing_to_revoke", "revoke", show=False),  # the same key, to say there is nothing
        Binding("right_square_bracket", "attention(1)", "next"),
        Binding("left_square_bracket", "attention(-1)", "prev ⚑", show=False),
        Binding("slash", "search", "search", show=False),
        Binding("f", "filter", "filter"),
        Binding("s", "sort", "sort", show=False),
        Binding("tab", "switch", "list/evidence", show=False),
        Binding("c", "adjust", "adjust"),  # shown only for a fit with controls (check_action)
        Binding("enter", "open", "evidence", show=False),
        Binding("escape", "back", "back to list", show=False),
        Binding("question_mark", "help", "help"),
        Binding("q", "quit", "quit"),
    ]

    def __init__(self, session: TriageSession) -> None:
        super().__init__()
        self.session = session
        self._actions_shown: tuple | None = None
        self._last_search = ""
        self._told: str | None = None  # the last record by someone else this screen has told about
        self._status_lines: int | None = None
        self._waiting_key: tuple | None = None  # (action, shown): a key pressed before the results were all read
        self._came_up: tuple[str | None, float] = (None, 0.0)  # the series shown and when it came up (``too_soon``)
        self._moved_on_at = -1.0  # when a decision here last moved the cursor on (``DecisionFlow.decide``)
        self._unsaid: dict[str, str] = {}  # series id → the note of a decision the ledger refused, offered again
        self._keys_said: tuple = (None, None, None, True)  # what the header says of the ledger (``ledger_said``)
        self._listed = -1  # the rows the header counts as listed
        self.leaving = False  # q taken: no key acts any more (``action_quit``)

    def compose(self) -> ComposeResult:
        yield Static(id="status-line", markup=False)
        with Horizontal(id="panes"):
            yield SeriesList(self.session, id="series-list")
            yield EvidencePanel(self.session, id="evidence")
        yield KeyLine(id="key-line")

    def on_mount(self) -> None:
        self.split(self.app.size.width)
        self.query_one(SeriesList).focus()
        self.set_interval(POLL_SECONDS, self.poll_ledger)
        self.update_status()

    def on_resize(self) -> None:
        self.split(self.size.width)
        self.update_status()

    def split(self, width: int) -> None:
        """The panes' widths by CSS class: one pane below NARROW; then the list widens first (the evidence at
        EVIDENCE_LEAST, ``list-grows``) up to LIST_ROOM (``list-room``), then both take half."""
        self.set_class(width < NARROW, "narrow")
        self.set_class(NARROW <= width < LIST_ROOM + EVIDENCE_LEAST, "list-grows")
        self.set_class(LIST_ROOM + EVIDENCE_LEAST <= width < 2 * LIST_ROOM, "list-room")

    def on_screen_suspend(self) -> None:
        """A dialog opens over the screen: its notifications band empties (the dialog's screen shows them,
        new ones too; left in place, the band's copy was drawn beneath the dialog's, cut by it)."""
        for rack in self.query("ToastRack"):  # Textual's own widget, by its type's name
            rack.display = False

    def on_screen_resume(self) -> None:
        """Back on top with no dialog over it: every dialog's answer has run by now (Textual posts the answer to
        this screen before it tells it to resume), so no key is held back after this; a dialog closed without
        an answer would otherwise hold the keys for good."""
        if self.app.screen is self:
            self.answers_due = 0

    # -- what is shown -----------------------------------------------------------------------
    @property
    def series_list(self) -> SeriesList:
        return self.query_one(SeriesList)

    @property
    def evidence(self) -> EvidencePanel:
        return self.query_one(EvidencePanel)

    @on(SeriesList.Highlighted)
    def highlighted(self, event: SeriesList.Highlighted) -> None:
        self.show_current()

    def show_current(self) -> None:
        """The highlighted series is what the screen shows now: decisions act on it."""
        s = self.session.current
        shown = self.session.look(s)
        if shown is not None and shown.sid != self._came_up[0]:
            self._came_up = (shown.sid, time.monotonic())
        self.evidence.show(s, now=self.evidence.series is None)
        if len(self.session.view) != self._listed:  # a series another analyst decided let go as the cursor left it
            self.update_status()
        self.refresh_footer()

    def refresh_footer(self) -> None:
        """Redraw the footer only when the keys that can act have changed (it is slow to redraw)."""
        shown = tuple(bool(self.check_action(name, ())) for name in
                      ("accept", "override", "note", "hold", "revoke", "attention"))
        if shown != self._actions_shown:
            self._actions_shown = shown
            self.refresh_bindings()

    def update_status(self) -> None:
        """The header; a layout pass only when its number of lines changes (one costs more than a repaint)."""
        line = self.query_one("#status-line", Static)
        text = status_text(self.session, max(self.size.width - 2, 20))
        lines = text.plain.count("\n")
        line.update(text, layout=lines != self._status_lines)
        self._status_lines, self._keys_said, self._listed = lines, self.ledger_said(), len(self.session.view)

    def ledger_said(self) -> tuple:
        """What the header says of the ledger beside these results (when it changes, the header is redrawn),
        and whether decisions can be recorded (a ledger turned broken brings no record to redraw the list by)."""
        session = self.session
        return session.key_columns.said, session.spellings.said, session.missing.short(), session.writable

    def refresh_all(self) -> None:
        self.series_list.reload()  # posts Highlighted: the evidence and ``shown`` follow
        self.update_status()
        self.refresh_footer()

    def poll_ledger(self) -> None:
        """Show other analysts' decisions that reached the ledger since the last look."""
        try:
            changed = self.session.reload_ledger()
        except (OSError, PricefoldError) as exc:
            self.notify(f"could not read the ledger: {printable(str(exc))}", severity="error", markup=False)
            return
        said, before = self.session.key_columns.said, self._keys_said
        if self.ledger_said() != before:  # another analyst's records started (or joined) a set of key columns,
            # brought a series spelled like these results' otherwise, or signed one they do not hold; or it broke
            self.update_status()
            self.refresh_footer()
            if said is not None and said != before[0]:
                self.notify(f"The ledger changed: {said}. Your next decision asks first.", severity="warning",
                            timeout=10, markup=False)
        if changed:
            self.refresh_all()
        watch = self.session.results_watch
        if watch is not None and watch.said is None and watch.replaced():  # a refit put new results in its place
            self.update_status()
            self.notify(printable(watch.said), severity="warning", timeout=12, markup=False)
        news = self.session.news
        if news is not None and news.get("digest") != self._told:
            self._told = news.get("digest")
            gone = ": it has left your list, and decision keys wait until you move" if self.session.waiting else ""
            self.notify(f"{describe(news)} on {self.session.label(self.session.current)}{gone}", markup=False,
                        timeout=6)

    # -- which keys can act now ------------------------------------------------------------
    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if self.leaving:
            return None
        if self.answers_due and self.app.screen is self:  # a dialog closed, its answer not yet acted on
            return None  # a key typed ahead of the next dialog does nothing (``open_dialog``)
        session = self.session
        s = session.current
        results = session.results
        if action in ("accept", "override", "nothing_to_override", "note", "hold", "revoke") and not session.writable:
            return False
        if action in ("accept", "override", "nothing_to_override", "note", "hold") and (s is None or session.waiting):
            return False
        if action in ("accept", "override", "nothing_to_override", "hold") and session.decided_on_newer(s):
            return False  # the ledger refuses them: the series is due a look in the newer results
        # Python booleans only: Textual hides a key for ``False`` itself, and numpy's False is not that
        if action == "accept":  # not where the proposal stands accepted on this data: the ledger would refuse it
            return bool(results.chosen[s] >= 0) and (session.status[s] != "accepted"
                                                     or session.accepted_other(s) is not None)
        if action in ("override", "nothing_to_override"):
            others = bool(results.chosen[s] >= 0 and results.available[s].sum() >= 2)
            return others == (action == "override")
        if action in ("revoke", "nothing_to_revoke"):
            return (session.undo_target() is not None) == (action == "revoke")
        if action == "attention":
            return bool(session.needs_attention()[session.view].any())
        if action == "adjust":  # only a fit with controls has volumes to adjust
            return results.controls is not None
        return True

    # -- decision keys (the dialogs and the ledger: ``DecisionFlow``) -------------------------
    def still_reading(self, action: str) -> bool:
        """A sign-off records the curve's interval parts, which a results file brings in behind the list:
        until they are in, accept and override wait (and say so), then act if the same series is still shown."""
        if self.session.results.complete:
            return False
        waiting = (action, self.session.shown)
        if self._waiting_key != waiting:  # the same key again on the same series still waits, unsaid
            self._drop_waiting("you pressed another decision key")
        self._waiting_key = waiting
        self.app.read_the_rest()  # if not begun yet (it waits for the series on screen to be fitted first)
        self.notify("Reading the rest of the results file: the key acts when it is in, if this series is "
                    "still shown.", timeout=3, markup=False)
        return True

    def results_complete(self) -> None:
        """The rest of the results file is in: a key that waited for it acts now, if the series it was pressed
        on is still shown as it was and nothing covers the screen; else the analyst is told it did not act."""
        waiting = self._waiting_key
        if waiting is None or not self.session.results.complete:
            return
        if waiting[1] == self.session.shown and self.app.screen is self:
            self._waiting_key = None
            getattr(self, f"action_{waiting[0]}")()
        else:
            self._drop_waiting("the screen changed before the results file was read")

    def _drop_waiting(self, why: str) -> None:
        """Forget a key that waited for the rest of the results file, saying so: nothing is ever decided on a
        series that is no longer the one on screen."""
        waiting, self._waiting_key = self._waiting_key, None
        if waiting is not None:
            action, shown = waiting
            at = self.session.index_of(shown)
            self.notify(f"Not done: {action} on {self.session.label(at) if at >= 0 else clean(shown.sid)} "
                        f"({why}); press the key again.",
                        severity="warning", timeout=8, markup=False)

    def typing(self, action: str) -> bool:
        """Whether ``action``'s key came within ``LOST_WITHIN`` of a printable key that did nothing: a word being
        typed where no box is open (a note begun after an accept that asked for none), not a decision — then the
        key is not done, and the screen says so.  Keys typed that fast on the list are not read one by one."""
        if SETTLE_SECONDS <= 0 or time.monotonic() - self.app.key_lost_at >= LOST_WITHIN:
            return False
        self.notify(f"Not done: {action}, pressed right after keys that did nothing here (typing a note? no box is "
                    "open); look at the screen, then press the key again.", severity="warning", timeout=6,
                    markup=False)
        return True

    def just_decided(self) -> bool:
        """Whether a decision here moved the cursor on less than ``AFTER_DECISION_SECONDS`` ago: a key now may be a
        note begun where none was asked."""
        return SETTLE_SECONDS > 0 and time.monotonic() - self._moved_on_at < AFTER_DECISION_SECONDS

    def too_soon(self, action: str) -> bool:
        """Whether the series shown came up too recently for ``action`` to be meant for it (``SETTLE_SECONDS``),
        or the key came amid typing (``typing``): then the key is not done, and the screen says so."""
        shown = self.session.shown
        if shown is None or SETTLE_SECONDS <= 0:
            return False
        if shown.sid != self._came_up[0]:  # moved on (after a decision) and not drawn yet: it comes up now
            self._came_up = (shown.sid, time.monotonic())
        if self.typing(action):
            return True
        moved = self.just_decided()
        settle = AFTER_DECISION_SECONDS if moved else SETTLE_SECONDS
        if not moved and time.monotonic() - self._came_up[1] >= settle:
            return False
        on = "" if action == "revoke" else f" on {self.session.label(shown.series)}"  # a revoke: this screen's latest
        why = ("after your last decision (a key typed twice, or a note begun where none was asked?)" if moved else
               "ago (a key typed twice, or pressed as it came up?)")
        self.notify(f"Not done: {action}{on}, {'which' if on else 'the series shown'} came up less than "
                    f"{settle:g} s {why}; look at it, then press the key again.", severity="warning", timeout=5,
                    markup=False)
        return True

    def action_accept(self) -> None:
        shown = self.session.shown
        if shown is None or self.too_soon("accept") or self.still_reading("accept"):
            return
        self.new_key_set("accept", lambda: self.accept(shown))

    def action_hold(self) -> None:
        shown = self.session.shown
        if shown is not None and not self.too_soon("hold"):
            self.new_key_set("hold", lambda: self.hold(shown))

    def action_override(self) -> None:
        shown = self.session.shown
        if shown is None or self.too_soon("override") or self.still_reading("override"):
            return
        # where the series is when the dialog opens: a first-decision question may stand between (results swapped)
        self.new_key_set("override", lambda: self.override(shown, self.session.index_of(shown)))

    def action_note(self) -> None:
        shown = self.session.shown
        if shown is not None and not self.too_soon("note"):
            self.new_key_set("note", lambda: self.note(shown))

    def action_nothing_to_override(self) -> None:
        results, s = self.session.results, self.session.current
        fitted = [name for c, name in enumerate(results.names) if results.available[s, c]]
        said = (f"only {fitted[0]} could be fitted to this series" if fitted else "no candidate could be fitted")
        self.notify(f"Nothing to override with: {said} (the evidence says why the others could not).",
                    severity="warning", markup=False)

    def action_nothing_to_revoke(self) -> None:
        self.notify("Nothing to revoke: no decision of yours made on this screen still stands.",
                    severity="warning", markup=False)

    def action_revoke(self) -> None:
        """Revoke this screen's latest decision that still stands, wherever it is, once the dialog is answered
        (``DecisionFlow.revoke``); the cursor goes there."""
        target = self.session.undo_target()
        if target is None:
            self.action_nothing_to_revoke()
            return
        if not self.too_soon("revoke"):  # 'a u…', a note begun after an accept that asked none: not a revoke
            self.revoke(*target)

    # -- moving around ---------------------------------------------------------------------
    def action_attention(self, step: int) -> None:
        was = self.session.cursor
        if not self.session.jump_attention(step):
            return
        self.series_list.reload()
        now = self.session.cursor
        if now == was:
            self.notify("This is the only series listed that needs attention.", markup=False, timeout=3)
        elif (now < was) == (step > 0):  # went round the end of the list: said, not a silent jump to its far end
            self.notify("Back to the first series needing attention (none after this one)." if step > 0 else
                        "Back to the last series needing attention (none before this one).", markup=False, timeout=3)

    def action_search(self) -> None:
        def found(text: str | None) -> None:
            if text is None or not text.strip():
                return
            self._last_search = text
            hit = self.session.search(text)
            if not hit.found:
                self.notify(f"no series matches '{printable(text.strip())}'", severity="warning", markup=False)
                return
            if hit.switched:
                self.notify(f"none listed matched: showing all series ({hit.overall:,} match)", markup=False)
            else:
                typed = f", {hit.exact:,} in the Unicode form typed first" if 0 < hit.exact < hit.in_view else ""
                self.notify(f"{hit.in_view:,} listed match{typed} ({hit.overall:,} in all series); / and Enter for "
                            "the next", markup=False, timeout=3)
            self.refresh_all()
        self.open_dialog(TextDialog("Search series by key (Enter again for the next match)",
                                        "part of a product or segment name", value=self._last_search), found)

    def action_filter(self) -> None:
        session = self.session
        counts = session.filter_counts()
        flag = f" ⚑ {session.flag_filter}" if session.flag_filter else ""
        options = [(name, f"{FILTER_TITLES[name]}{flag}  ({counts[name]:,})") for name in FILTERS]
        status = FILTER_TITLES[session.filter]
        options.append(("flag:", f"{status}, any flag  ({counts['flag:']:,})"))
        options += [(f"flag:{c}", f"{status}, ⚑ {c}  ({counts[f'flag:{c}']:,})") for c in CODES]

        def chosen(key: str | None) -> None:
            if key is None:
                return
            if key.startswith("flag:"):
                session.set_filter(KEEP, key.split(":", 1)[1] or None)
            else:
                session.set_filter(key, KEEP)
            self.refresh_all()
        current = f"flag:{session.flag_filter}" if session.flag_filter else session.filter
        prompt = "Show which series? A status, or a flag within the status shown now ('any flag' drops the flag)"
        self.open_dialog(ChoiceDialog(prompt, options, current), chosen)

    def action_sort(self) -> None:
        def chosen(key: str | None) -> None:
            if key is not None:
                self.session.set_sort(key)
                self.refresh_all()
        self.open_dialog(ChoiceDialog("Order the list by", [(k, SORT_TITLES[k]) for k in SORTS],
                                          self.session.sort), chosen)

    def action_switch(self) -> None:
        if self.has_class("narrow"):
            show = not self.has_class("show-evidence")
            self.set_class(show, "show-evidence")
            (self.evidence if show else self.series_list).focus()
        else:
            (self.evidence if self.series_list.has_focus else self.series_list).focus()

    def action_back(self) -> None:
        self._drop_waiting("you pressed Esc")
        if self.has_class("show-evidence"):
            self.remove_class("show-evidence")
            self.series_list.focus()

    def action_open(self) -> None:
        if self.has_class("narrow") and not self.has_class("show-evidence"):
            self.add_class("show-evidence")
            self.evidence.focus()

    def action_adjust(self) -> None:
        """The observations chart between raw volumes and volumes adjusted to the plan's controls."""
        self.evidence.adjusted = not self.evidence.adjusted
        self.evidence.redraw_charts()
        self.notify("observations adjusted to the plan's controls" if self.evidence.adjusted else "observations raw",
                    markup=False, timeout=2)

    def action_help(self) -> None:
        said = "\n  ".join(filter(None, (fitted_text(self.session), keys_text(self.session.key_columns),
                                         spellings_text(self.session), missing_text(self.session))))
        self.open_dialog(MessageDialog(help_text(self.session.book, said or None, rejected_text(self.session),
                                                 self.session.results),
                                       classes="help"))

    def action_quit(self) -> None:
        """``q``, unless it begins a note typed where no box is open: right after a decision moved the cursor on,
        or amid keys that did nothing (the rest of "quite good" went to the shell, run as a command)."""
        if self.just_decided():
            self.notify(f"Not done: quit, pressed less than {AFTER_DECISION_SECONDS:g} s after your last decision (a "
                        "note begun where none was asked?); press q again to leave.", severity="warning", timeout=5,
                        markup=False)
            return
        if not self.typing("quit"):
            # keys right behind q (one read over SSH: "qs") open no dialog as the app closes: the sort dialog's
            # list was gone before it mounted (a traceback, exit 1, after a plain quit)
            self.leaving = True
            self.app.exit()
