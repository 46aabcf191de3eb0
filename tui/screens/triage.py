"""The triage screen: the series list beside the evidence for the highlighted series."""
from __future__ import annotations

from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.screen import Screen
from textual.widgets import Footer, Static

from fitcore.errors import PricefoldError
from fitcore.review.flags import CODES

from ..help import help_text
from ..session import FILTER_TITLES, FILTERS, SORT_TITLES, SORTS, TriageSession
from ..text import clean
from ..widgets.evidence import EvidencePanel
from ..widgets.series_list import SeriesList
from .dialogs import ChoiceDialog, MessageDialog, TextDialog

NARROW = 110  # below this many columns, show the list or the evidence, not both
POLL_SECONDS = 2.0
EVIDENCE_DELAY = 0.12  # redraw the charts once the cursor rests, not on every key of a fast scroll


class TriageScreen(Screen):
    BINDINGS = [
        Binding("a", "decide('accept')", "accept"),
        Binding("o", "override", "override"),
        Binding("n", "note", "note"),
        Binding("h", "decide('hold')", "hold"),
        Binding("u", "withdraw", "withdraw"),
        Binding("right_square_bracket", "attention(1)", "next"),
        Binding("left_square_bracket", "attention(-1)", "prev ⚑", show=False),
        Binding("slash", "search", "search", show=False),
        Binding("f", "filter", "filter"),
        Binding("s", "sort", "sort", show=False),
        Binding("tab", "switch", "list/evidence", show=False),
        Binding("enter", "open", "evidence", show=False),
        Binding("escape", "back", "back to list", show=False),
        Binding("question_mark", "help", "help"),
        Binding("q", "quit", "quit"),
    ]

    def __init__(self, session: TriageSession) -> None:
        super().__init__()
        self.session = session
        self._evidence_timer = None
        self._actions_shown: tuple | None = None

    def compose(self) -> ComposeResult:
        yield Static(id="status-line", markup=False)
        with Horizontal(id="panes"):
            yield SeriesList(self.session, id="series-list")
            yield EvidencePanel(self.session, id="evidence")
        yield Footer()

    def on_mount(self) -> None:
        self.set_class(self.app.size.width < NARROW, "narrow")
        self.query_one(SeriesList).focus()
        self.set_interval(POLL_SECONDS, self.poll_ledger)
        self.update_status()

    def on_resize(self) -> None:
        self.set_class(self.size.width < NARROW, "narrow")

    # -- what is shown -----------------------------------------------------------------------
    @property
    def series_list(self) -> SeriesList:
        return self.query_one(SeriesList)

    @property
    def evidence(self) -> EvidencePanel:
        return self.query_one(EvidencePanel)

    @on(SeriesList.Highlighted)
    def highlighted(self, event: SeriesList.Highlighted) -> None:
        if self._evidence_timer is not None:
            self._evidence_timer.stop()
        if self.evidence.series is None:
            self.evidence.show(event.series)
        else:
            self._evidence_timer = self.set_timer(EVIDENCE_DELAY, lambda: self.evidence.show(self.session.current))
        self.refresh_footer()

    def refresh_footer(self) -> None:
        """Redraw the footer only when the keys that can act have changed (it is slow to redraw)."""
        shown = tuple(bool(self.check_action(name, args)) for name, args in (
            ("decide", ("accept",)), ("override", ()), ("note", ()), ("withdraw", ()), ("attention", ())))
        if shown != self._actions_shown:
            self._actions_shown = shown
            self.refresh_bindings()

    def update_status(self) -> None:
        counts = self.session.counts()
        s = self.session
        flag = f" ⚑ {s.flag_filter}" if s.flag_filter else ""
        text = Text("pricefold triage", style="bold")
        text.append(f"  {clean(s.who.analyst)}  ·  ", style="dim")
        text.append(f"{len(s.view):,} listed ({FILTER_TITLES[s.filter]}{flag}; by {SORT_TITLES[s.sort]})  ·  ")
        text.append(f"attention {counts['attention']:,}  pending {counts['pending']:,}  "
                    f"accepted {counts['accepted']:,}  overridden {counts['overridden']:,}  held {counts['held']:,}"
                    + (f"  stale {counts['stale']:,}" if counts["stale"] else ""))
        self.query_one("#status-line", Static).update(text)

    def refresh_all(self) -> None:
        self.series_list.reload()
        self.update_status()
        self.refresh_footer()

    def poll_ledger(self) -> None:
        """Show other analysts' decisions that reached the ledger since the last look."""
        try:
            changed = self.session.reload_ledger()
        except (OSError, PricefoldError) as exc:
            self.notify(f"could not read the ledger: {clean(str(exc))}", severity="error", markup=False)
            return
        if changed:
            self.refresh_all()

    # -- which keys can act now ------------------------------------------------------------
    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        s = self.session.current
        results = self.session.results
        if action == "decide" and parameters == ("accept",):
            return s is not None and results.chosen[s] >= 0
        if action == "override":
            return s is not None and results.chosen[s] >= 0 and results.available[s].sum() >= 2
        if action in ("note", "decide"):
            return s is not None
        if action == "withdraw":
            return s is not None and self.session.can_withdraw(s)
        if action == "attention":
            return bool(self.session.needs_attention()[self.session.view].any())
        return True

    # -- decisions ---------------------------------------------------------------------------
    def record(self, action: str, model: str | None = None, note: str = "") -> None:
        s = self.session.current
        if s is None:
            return
        try:
            self.session.record(s, action, model=model, note=note)
        except PricefoldError as exc:
            self.app.push_screen(MessageDialog(Text(f"Not recorded: {clean(str(exc))}", style="bold")))
            return
        self.notify(f"{action} recorded for {self.session.label(s)}", markup=False, timeout=3)
        if action in ("accept", "override", "hold"):
            self.session.after_decision(s)
        else:
            self.session.rebuild_view(keep=s)
        self.refresh_all()

    def action_decide(self, action: str) -> None:
        self.record(action)

    def action_override(self) -> None:
        s = self.session.current
        results = self.session.results
        options = [(c.name, f"{c.name}  CV MSE {results.cv_mse[s, i]:,.4g}")
                   for i, c in enumerate(results.candidates) if results.available[s, i] and i != results.chosen[s]]

        def picked(model: str | None) -> None:
            if model is None:
                return
            self.app.push_screen(TextDialog(f"Why {model} instead of {results.names[results.chosen[s]]}?",
                                            "a note is required", required=True),
                                 lambda note: None if note is None else self.record("override", model, note))

        self.app.push_screen(ChoiceDialog("Override: choose the candidate to use", options), picked)

    def action_note(self) -> None:
        self.app.push_screen(TextDialog("Note on this series", "what should the next reader know?", required=True),
                             lambda note: None if note is None else self.record("note", note=note))

    def action_withdraw(self) -> None:
        self.record("revoke")

    # -- moving around ---------------------------------------------------------------------
    def action_attention(self, step: int) -> None:
        if self.session.jump_attention(step):
            self.series_list.show_cursor()
            self.series_list.post_message(SeriesList.Highlighted(self.session.current))

    def action_search(self) -> None:
        def found(text: str | None) -> None:
            if text is None:
                return
            if self.session.search(text):
                self.series_list.reload()
            else:
                self.notify(f"no listed series matches {text!r}", severity="warning", markup=False)
        self.app.push_screen(TextDialog("Search series by key", "part of a product or segment name"), found)

    def action_filter(self) -> None:
        options = [(name, FILTER_TITLES[name]) for name in FILTERS] + [(f"flag:{c}", f"flag {c}") for c in CODES]

        def chosen(key: str | None) -> None:
            if key is None:
                return
            if key.startswith("flag:"):
                self.session.set_filter("all", key.split(":", 1)[1])
            else:
                self.session.set_filter(key)
            self.refresh_all()
        current = f"flag:{self.session.flag_filter}" if self.session.flag_filter else self.session.filter
        self.app.push_screen(ChoiceDialog("Show which series?", options, current), chosen)

    def action_sort(self) -> None:
        def chosen(key: str | None) -> None:
            if key is not None:
                self.session.set_sort(key)
                self.refresh_all()
        self.app.push_screen(ChoiceDialog("Order the list by", [(k, SORT_TITLES[k]) for k in SORTS],
                                          self.session.sort), chosen)

    def action_switch(self) -> None:
        if self.has_class("narrow"):
            show = not self.has_class("show-evidence")
            self.set_class(show, "show-evidence")
            (self.evidence if show else self.series_list).focus()
        else:
            (self.evidence if self.series_list.has_focus else self.series_list).focus()

    def action_back(self) -> None:
        if self.has_class("show-evidence"):
            self.remove_class("show-evidence")
            self.series_list.focus()

    def action_open(self) -> None:
        if self.has_class("narrow") and not self.has_class("show-evidence"):
            self.add_class("show-evidence")
            self.evidence.focus()

    def action_help(self) -> None:
        self.app.push_screen(MessageDialog(help_text(), classes="help"))

    def action_quit(self) -> None:
        self.app.exit()
