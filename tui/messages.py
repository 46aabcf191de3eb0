"""Messages the whole app hears, named for what happened."""
from __future__ import annotations

from textual.message import Message


class FitProgressed(Message):
    """Series fitted so far; frequent, so a newer one replaces an unprocessed older one."""

    def __init__(self, done: int, total: int) -> None:
        super().__init__()
        self.done, self.total = done, total

    def can_replace(self, message: Message) -> bool:
        return isinstance(message, FitProgressed)


class SessionReady(Message):
    """Results are fitted and diagnosed and the ledger is read: triage can start."""

    def __init__(self, session) -> None:
        super().__init__()
        self.session = session


class LoadFailed(Message):
    """Opening the data, results or ledger failed; ``reason`` is one line for the analyst."""

    def __init__(self, reason: str) -> None:
        super().__init__()
        self.reason = reason


class RowsLoaded(Message):
    """A fit of the data arrived for a session opened from a results file: observations can be drawn."""

    def __init__(self, results, diagnosis) -> None:
        super().__init__()
        self.results, self.diagnosis = results, diagnosis


class FirstRows(Message):
    """The series around the cursor, fitted before the whole data: their observations can be drawn.

    ``results`` holds them in the order of ``series`` (the session's indices)."""

    def __init__(self, results, series: list[int]) -> None:
        super().__init__()
        self.results, self.series = results, series


class EvidenceReady(Message):
    """Something the evidence waited for is in (the engine's compiled loops, the rest of a results file)."""


class RowsFailed(Message):
    """The data behind a results file could not be read or had changed; ``reason`` is one line."""

    def __init__(self, reason: str) -> None:
        super().__init__()
        self.reason = reason
