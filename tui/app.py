"""The triage app: opens a session in a thread started with the app, then hands over to the triage screen."""
from __future__ import annotations

import threading
import time
from typing import TYPE_CHECKING, Callable

from rich.text import Text
from textual import events, work
from textual.app import App, ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import Static

from fitcore.errors import PricefoldError

from . import engine
from .escape_keys import keep_escape_on_punctuation
from .messages import EvidenceReady, FirstRows, FitProgressed, LoadFailed, RowsFailed, RowsLoaded, SessionReady
from .opening import Opening
from .screens.dialogs import MessageDialog, TextDialog
from .text import printable

if TYPE_CHECKING:  # the triage screen's modules load while the session opens (``load_screen``)
    from .screens.triage import TriageScreen
    from .session import TriageSession


def load_screen() -> type[TriageScreen]:
    """The triage screen's class.  Its modules (the evidence, charts, dialogs) are imported on the UI thread
    while the session opens in its thread, not before the app starts (where the results' read waited for them)."""
    from .screens.triage import TriageScreen
    return TriageScreen


def settle() -> None:
    """Move everything loaded so far out of the garbage collector's sight, and turn the collector on (the
    command line turns it off until the first list is drawn).

    A triage session holds hundreds of thousands of long-lived objects; every
    full collection would walk them all (measured: 40 ms pauses every ~15 key
    presses at 100k series).  They live as long as the app, so they are frozen.
    """
    import gc
    gc.collect()
    gc.freeze()
    gc.enable()


def series_in(data, keys: list[dict]) -> list[int]:
    """Where each key is among the series of ``data`` (a loaded ``Dataset``), -1 where it is not: through a
    dict of every series' key (100,000 series ≈ 25 ms), not Arrow's join (``SeriesKeys.indices_of``), whose
    module imports pandas (0.3 s) on the way to the first observations."""
    names = data.key_names
    place = {key: at for at, key in enumerate(zip(*(data.keys[name].tolist() for name in names)))}
    return [place.get(tuple(str(key.get(name, "")) for name in names), -1) for key in keys]


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
    """``opener(progress)`` builds the ``TriageSession``; it runs in a thread started with the app, or is that
    thread already started (an ``Opening``: the results read while the app's modules loaded).

    ``observer(progress, first)``, when given, runs in a second worker once the session is up and returns
    ``(results, diagnosis)`` with the observations, for a session opened from a results file; it calls
    ``first(reading)`` once the data are read (``fitcore.results.source.refit_stored``), and the series
    around the cursor are fitted and drawn before the rest.
    """
    FIRST_AROUND = 60  # rows either side of the cursor fitted first: a page down or two stays observed
    SMALL = 20_000  # series: a results file this small is read whole at once (its data are no slower for it)

    CSS_PATH = ["styles/base.tcss", "styles/triage.tcss"]
    TITLE = "pricefold triage"
    ENABLE_COMMAND_PALETTE = False
    # Ctrl+C ends the app, as it ends any command in a terminal (Textual's own binding only says to press
    # ctrl+q, a key the footer never shows), also while the data are read and fitted; a text field that
    # takes Ctrl+C itself (copy) keeps it.
    # Ctrl+Z puts the screen in the background as it does any command (``fg`` brings it back; Textual binds none).
    BINDINGS = [Binding("ctrl+c", "interrupt", "quit", show=False),
                Binding("ctrl+z", "suspend_process", "background", show=False)]
    key_lost_at = -1.0  # when a printable key was last taken by nothing (``on_key``)

    def on_key(self, event) -> None:
        """A printable key no widget took while a text box is up: typed in one burst with the key that opened
        the box, it went to the list before the box's field had the focus, and is lost.  The box is told, so
        its next Enter asks for a look at the text instead of recording what the box holds (a hold's optional
        reason was recorded empty, the words typed for it gone)."""
        if event.key.startswith("alt+") and not self.screen.is_modal:  # Esc and a key typed together (``escape_keys``)
            event.stop()  # on the screen both were meant: Esc (back to the list), then the key itself
            self.post_message(events.Key("escape", "\x1b"))
            self.post_message(events.Key(event.key[len("alt+"):], event.character))
            return
        if not event.is_printable:
            return
        bound = self.screen.active_bindings.get(event.key)
        if bound is not None and bound.enabled:  # a key of the screen's own, acted on (handlers run for every key)
            return
        self.key_lost_at = time.monotonic()  # a box opening right after was meant to get it (``TextDialog``)
        if isinstance(self.screen, TextDialog):
            self.screen.keys_lost()

    def __init__(self, opener: Callable[[Callable[[int, int], None]], TriageSession] | Opening,
                 observer=None) -> None:
        keep_escape_on_punctuation()  # before the driver's parser is made
        # the session opens from now on (or already does), not from the first frame on
        self.opening = opener if isinstance(opener, Opening) else Opening(opener)
        super().__init__()
        self.observer = observer
        self.session: TriageSession | None = None
        self.failure: str | None = None  # why the session could not be opened (the command line says it too)
        self.stopped_by: int | None = None  # the signal (SIGTERM, SIGHUP) that ended the screen, if one did
        self.note_lost = False  # a note box was open when a signal ended it (held text when Ctrl+C did)
        self._mounted = threading.Event()  # progress reaches the loading screen once there is one
        self.opening.report_to(self._progressed)

    def action_suspend_process(self) -> None:
        """Ctrl+Z: the terminal's own stop, sent as the terminal sends it — to the whole foreground job.  Textual's
        stops this process alone: under a wrapper (``bash -c``, a script) the screen went and the shell never came
        back, its job still running.  The driver's handler leaves the screen, then stops the process."""
        import os
        import signal
        driver = self._driver
        if os.name != "posix" or driver is None or not driver.can_suspend:
            return
        self.app_suspend_signal.publish(self)
        # the screen left while this job still owns the terminal (stopped first, the shell takes the terminal
        # back and the screen's last writes would stop it mid-way); then the job stopped as the terminal would
        driver.suspend_application_mode()
        handler = signal.signal(signal.SIGTSTP, signal.SIG_DFL)
        try:
            os.killpg(os.getpgrp(), signal.SIGTSTP)
        finally:  # continued (fg): the driver's SIGCONT handler has put the screen back
            signal.signal(signal.SIGTSTP, handler)

    def action_interrupt(self) -> None:
        """Ctrl+C: while the session still opens (reading, fitting) the command was interrupted, as a fit's
        Ctrl+C is (exit 130); once the list is up it is a quit like any other (each decision is already written) —
        but where it drops a note typed in a box (its second press there, ``TextDialog.action_leave``), the
        command was interrupted with work lost, as a kill's (exit 143) is: exit 130, and its line says so."""
        if self.session is None and self.failure is None:
            self.exit(return_code=130)
            return
        self.note_lost = isinstance(self.screen, TextDialog) and self.screen.holds_text()
        self.exit(return_code=130 if self.note_lost else 0)

    def _stop_on_signals(self) -> None:
        """SIGTERM (a kill) and SIGHUP (the SSH link dropped) end the screen as ``q`` does, the terminal given
        back: by default they ended the process at once, the terminal left in the screen's mode and nothing said.
        Every decision is in the ledger already; a note being typed is not recorded (``open_triage`` says so)."""
        import asyncio
        import signal
        loop = asyncio.get_running_loop()
        for number in (signal.SIGTERM, signal.SIGHUP):
            try:
                loop.add_signal_handler(number, self._stopped, number)
            except (NotImplementedError, RuntimeError, ValueError):  # no such signal here, or not the main thread
                pass

    def _stopped(self, number: int) -> None:
        from .screens.dialogs import TextDialog
        self.stopped_by = number
        self.note_lost = isinstance(self.screen, TextDialog)  # a note box open: what was typed in it is not recorded
        self.exit(return_code=128 + number)

    def _progressed(self, done: int, total: int) -> None:
        if self._mounted.is_set():
            self.post_message(FitProgressed(done, total))

    def on_mount(self) -> None:
        self._stop_on_signals()
        self.push_screen(LoadingScreen())
        self._mounted.set()
        self.open_session()
        self.call_after_refresh(load_screen)  # while the session opens: not after it

    @work(thread=True, exclusive=True, exit_on_error=False)
    def open_session(self) -> None:
        try:
            session = self.opening.result()
        except (PricefoldError, OSError) as exc:
            self.post_message(LoadFailed(str(exc)))
            return
        self.post_message(SessionReady(session))

    def on_fit_progressed(self, message: FitProgressed) -> None:
        if isinstance(self.screen, LoadingScreen):
            self.screen.progressed(message.done, message.total)

    def on_session_ready(self, message: SessionReady) -> None:
        self.session = message.session
        self.switch_screen(load_screen()(message.session))
        for warning in message.session.warnings:
            self.notify(printable(warning), severity="warning", timeout=10, markup=False)
        self.call_after_refresh(settle)  # after the first screen is drawn, not before it
        # Once the first screen is drawn.  With data to read, the engine's loops and the rest of a large results
        # file wait for the series around the cursor to be fitted: alongside the data's read they slowed it.
        results = message.session.results
        at_once = self.observer is None or results.n_series <= self.SMALL
        if not engine.loaded() and at_once:
            self.call_after_refresh(self.load_engine)
        if not results.complete:
            self.call_after_refresh(self.await_results, results)
            if at_once:
                self.call_after_refresh(self.read_the_rest)
        if self.observer is not None:
            self.call_after_refresh(self.read_observations)

    @work(thread=True, exit_on_error=False, group="engine")
    def load_engine(self) -> None:
        engine.load()
        self.post_message(EvidenceReady())

    @work(thread=True, exit_on_error=False, group="results")
    def await_results(self, results) -> None:
        """The columns of the results file read behind the list (``stored_results(later=True)``): the
        candidates' numbers the evidence shows at once, the rest once started."""
        try:
            results.later.wait_soon()
            self.post_message(EvidenceReady())
            results.later.wait()
            results.later.table()
        except (PricefoldError, OSError) as exc:
            self.post_message(LoadFailed(str(exc)))
            return
        self.post_message(EvidenceReady())

    def triage_screen(self) -> TriageScreen | None:
        """The triage screen, also under a dialog: what arrives while a dialog is open is drawn on it too
        (else the evidence kept saying "reading the data …" after the dialog closed)."""
        screen = load_screen()
        return next((s for s in reversed(self.screen_stack) if isinstance(s, screen)), None)

    def on_evidence_ready(self, message: EvidenceReady) -> None:
        screen = self.triage_screen()
        if screen is not None:
            # the candidates' numbers can arrive before the screen has composed its panes: the panel draws
            # them when it shows its first series
            for evidence in screen.query("EvidencePanel"):
                evidence.redraw()
            screen.results_complete()

    @work(thread=True, exclusive=True, exit_on_error=False, group="observations")
    def read_observations(self) -> None:
        threading.Thread(target=engine.load_charts, name="pricefold-charts", daemon=True).start()
        try:
            results, diagnosis = self.observer(lambda done, total: None, self.fit_first)
        except (PricefoldError, OSError) as exc:
            self.post_message(RowsFailed(str(exc)))
            self.read_the_rest()
            engine.load()  # the curves are still drawn, without observations
            self.post_message(EvidenceReady())
            return
        engine.load()
        self.post_message(RowsLoaded(results, diagnosis))

    def read_the_rest(self) -> None:
        """Start reading the columns of the results file that wait behind the list (once; from any thread)."""
        later = getattr(self.session.results, "later", None) if self.session is not None else None
        if later is not None:
            later.start()

    def fit_first(self, reading) -> None:
        """In the observations' worker, the data just read: fit the series around the cursor (the same
        engine on their rows alone: the whole fit's numbers) and show their observations before the rest."""
        try:
            wanted = self.call_from_thread(self.around_cursor)
            if not wanted:
                return
            found = series_in(reading.data, [key for _, key in wanted])
            pairs = sorted((int(at), s) for at, (s, _) in zip(found, wanted) if at >= 0)
            if pairs:
                results, _ = reading.fit(series=[at for at, _ in pairs])
                engine.load()  # the fit has started numba: the curve loop is a moment more
                self.post_message(FirstRows(results, [s for _, s in pairs]))
        finally:
            self.read_the_rest()

    def around_cursor(self) -> list[tuple[int, dict]]:
        """The series listed near the cursor, the highlighted one first, with their keys."""
        session = self.session
        if session is None or session.current is None:
            return []
        cursor, view = session.cursor, session.view
        near = [int(s) for s in view[max(cursor - self.FIRST_AROUND, 0):cursor + self.FIRST_AROUND]]
        order = [session.current] + [s for s in near if s != session.current]
        return [(s, session.keys.key_of(s)) for s in order]

    def on_first_rows(self, message: FirstRows) -> None:
        if self.session is not None:
            self.session.observe_first(message.results, message.series)
            if (screen := self.triage_screen()) is not None:  # the engine is in now, too
                screen.evidence.redraw_charts()

    def on_rows_loaded(self, message: RowsLoaded) -> None:
        if self.session is not None and self.session.upgrade(message.results, message.diagnosis):
            settle()
            if (screen := self.triage_screen()) is not None:
                screen.refresh_all()
                screen.evidence.redraw()
        else:
            self.unobserved("the data no longer match the results file: observations are not shown")

    def on_rows_failed(self, message: RowsFailed) -> None:
        self.unobserved(f"observations unavailable: {printable(message.reason)}")

    def unobserved(self, why: str) -> None:
        """The observations will not come: say why, and the charts say it where they would be drawn."""
        if self.session is not None:
            self.session.unobserved = why
        self.notify(why[0].upper() + why[1:] + ".", severity="warning", timeout=10, markup=False)
        if (screen := self.triage_screen()) is not None:  # the curves, now the engine is in
            screen.evidence.redraw_charts()

    def on_load_failed(self, message: LoadFailed) -> None:
        body = Text("Could not open the triage:\n\n", style="bold")
        body.append(printable(message.reason))
        self.failure = printable(message.reason)
        self.push_screen(MessageDialog(body), lambda _: self.exit(return_code=2))

    def on_worker_state_changed(self, event) -> None:
        """A failure no handler foresaw still reaches the analyst as a dialog, not a crash."""
        from textual.worker import WorkerState
        if event.state == WorkerState.ERROR:
            self.post_message(LoadFailed(f"{type(event.worker.error).__name__}: {event.worker.error}"))
