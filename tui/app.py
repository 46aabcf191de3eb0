"""The triage app: opens a session in a worker thread, then hands over to the triage screen."""
from __future__ import annotations

from typing import Callable

from rich.text import Text
from textual import work
from textual.app import App, ComposeResult
from textual.screen import Screen
from textual.widgets import Static

from fitcore.errors import PricefoldError

from .messages import FitProgressed, LoadFailed, RowsFailed, RowsLoaded, SessionReady
from .screens.dialogs import MessageDialog
from .screens.triage import TriageScreen
from .session import TriageSession
from .text import clean


def settle() -> None:
    """Move everything loaded so far out of the garbage collector's sight.

    A triage session holds hundreds of thousands of long-lived objects; every
    full collection would walk them all (measured: 40 ms pauses every ~15 key
    presses at 100k series).  They live as long as the app, so they are frozen.
    """
    import gc
    gc.collect()
    gc.freeze()


class LoadingScreen(Screen):
    """Shown while the data are read and fitted."""

    def compose(self) -> ComposeResult:
        yield Static(Text("pricefold — reading and fitting …", style="bold"), id="loading", markup=False)

    def progressed(self, done: int, total: int) -> None:
        share = done / total if total else 1.0
        bar = "█" * int(share * 40)
        self.query_one("#loading", Static).update(
            Text(f"pricefold — fitting {done:,} of {total:,} series\n{bar:<40} {share:4.0%}", style="bold"))


class TriageApp(App):
    """``opener(progress)`` builds the ``TriageSession``; it runs in a thread worker.

    ``observer(progress)``, when given, runs in a second worker once the session is up and returns
    ``(results, diagnosis)`` with the observations, for a session opened from a results file.
    """

    CSS_PATH = ["styles/base.tcss", "styles/triage.tcss"]
    TITLE = "pricefold triage"
    ENABLE_COMMAND_PALETTE = False

    def __init__(self, opener: Callable[[Callable[[int, int], None]], TriageSession], observer=None) -> None:
        super().__init__()
        self.opener, self.observer = opener, observer
        self.session: TriageSession | None = None

    def on_mount(self) -> None:
        self.push_screen(LoadingScreen())
        self.open_session()

    @work(thread=True, exclusive=True, exit_on_error=False)
    def open_session(self) -> None:
        try:
            session = self.opener(lambda done, total: self.post_message(FitProgressed(done, total)))
        except (PricefoldError, OSError) as exc:
            self.post_message(LoadFailed(str(exc)))
            return
        self.post_message(SessionReady(session))

    def on_fit_progressed(self, message: FitProgressed) -> None:
        if isinstance(self.screen, LoadingScreen):
            self.screen.progressed(message.done, message.total)

    def on_session_ready(self, message: SessionReady) -> None:
        self.session = message.session
        self.switch_screen(TriageScreen(message.session))
        for warning in message.session.warnings:
            self.notify(clean(warning), severity="warning", timeout=10, markup=False)
        self.call_after_refresh(settle)  # after the first screen is drawn, not before it
        if self.observer is not None:  # once the first screen is drawn: the fit competes for the interpreter
            self.call_after_refresh(lambda: self.set_timer(0.2, self.read_observations))

    @work(thread=True, exclusive=True, exit_on_error=False, group="observations")
    def read_observations(self) -> None:
        try:
            results, diagnosis = self.observer(lambda done, total: None)
        except (PricefoldError, OSError) as exc:
            self.post_message(RowsFailed(str(exc)))
            return
        self.post_message(RowsLoaded(results, diagnosis))

    def on_rows_loaded(self, message: RowsLoaded) -> None:
        if self.session is not None and self.session.upgrade(message.results, message.diagnosis):
            settle()
            if isinstance(self.screen, TriageScreen):
                self.screen.refresh_all()
                self.screen.evidence.redraw()
        else:
            self.notify("The data no longer match the results file: observations are not shown.",
                        severity="warning", timeout=10, markup=False)

    def on_rows_failed(self, message: RowsFailed) -> None:
        self.notify(clean(message.reason), severity="warning", timeout=10, markup=False)

    def on_load_failed(self, message: LoadFailed) -> None:
        body = Text("Could not open the triage:\n\n", style="bold")
        body.append(clean(message.reason))
        self.push_screen(MessageDialog(body), lambda _: self.exit(return_code=2, message=clean(message.reason)))

    def on_worker_state_changed(self, event) -> None:
        """A failure no handler foresaw still reaches the analyst as a dialog, not a crash."""
        from textual.worker import WorkerState
        if event.state == WorkerState.ERROR:
            self.post_message(LoadFailed(f"{type(event.worker.error).__name__}: {event.worker.error}"))
