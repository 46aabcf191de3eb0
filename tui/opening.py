"""A triage session opened in a thread of its own, which can start before the app's modules load.

No Textual here: a command line can start reading a results file first and import the app while Arrow
reads (the read lets go of the interpreter; importing Textual holds it), then hand the ``Opening`` to
``TriageApp``.
"""
from __future__ import annotations

import threading
from typing import TYPE_CHECKING, Callable

if TYPE_CHECKING:
    from .session import TriageSession


class Opening:
    """``opener(progress)`` run in a thread of its own from construction on; ``result()`` waits for it and
    raises what it raised.  ``progress(done, total)`` reaches whatever ``report_to`` named last (nothing
    before: a fit's progress from before the app has a screen to show it is not kept)."""

    def __init__(self, opener: Callable[[Callable[[int, int], None]], TriageSession]) -> None:
        self._session: TriageSession | None = None
        self._error: BaseException | None = None
        self._report: Callable[[int, int], None] = lambda done, total: None
        # a daemon: quitting while it still reads must not wait for it (as a Textual thread worker would not)
        self._thread = threading.Thread(target=self._open, args=(opener,), name="pricefold-opening", daemon=True)
        self._thread.start()

    def report_to(self, progress: Callable[[int, int], None]) -> None:
        self._report = progress

    def _progressed(self, done: int, total: int) -> None:
        self._report(done, total)

    def _open(self, opener) -> None:
        try:
            self._session = opener(self._progressed)
        except BaseException as exc:  # handed to ``result``'s caller: the app's one failure path
            self._error = exc

    def result(self) -> TriageSession:
        self._thread.join()
        if self._error is not None:
            raise self._error
        return self._session
