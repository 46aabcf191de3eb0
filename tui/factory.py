"""Building a triage session from files: a data file, or a results file and the data it names.

Used by the command line and by the tests alike, so both drive the same app.  Reading what a
results file was fitted from, and fitting it again, is ``fitcore.results.source`` (the report
needs it without the screen); its names are offered here too.
"""
from __future__ import annotations

from pathlib import Path
from typing import Callable

from fitcore.data.columns import Columns
from fitcore.errors import DataError
from fitcore.fit.settings import FitSettings
from fitcore.ledger import Identity, results_digest
from fitcore.ledger.elsewhere import fitted_elsewhere, fitted_ledger
from fitcore.results.read import read_header
from fitcore.results.source import (
    Source,
    default_ledger,
    fit_source,
    is_stored,
    read_source,
    refit_stored,
    source_from_results,
)
from fitcore.results.stored import stored_results

from .results_watch import ResultsWatch
from .session import TriageSession

__all__ = ["Source", "default_ledger", "fit_source", "is_stored", "open_session", "open_stored_session",
           "refit_stored", "sample_source", "source_from_results"]

SAMPLE = Path(__file__).resolve().parents[1] / "sample"


def open_session(source: Source, ledger_path: Path, who: Identity, key: bytes | None = None,
                 progress: Callable[[int, int], None] | None = None) -> TriageSession:
    from fitcore.results.write import header
    reading = read_source(source)
    results, diagnosis = reading.fit(progress)
    session = TriageSession(results, diagnosis, ledger_path, who, results_digest(header(results, diagnosis)), key,
                            units=source.units)
    session.warnings.extend(source.warnings)
    session.fitted_elsewhere = fitted_elsewhere(source.fitted_ledger, Path(ledger_path))
    if len(reading.rejects):  # said on the header and listed under ?: no rejects file is written here
        session.rejects = reading.rejects
    return session


def open_stored_session(path: Path, ledger_path: Path, who: Identity, key: bytes | None = None,
                        progress: Callable[[int, int], None] | None = None, units: dict | None = None) -> TriageSession:
    """A session on the results as the file holds them: no refit, no observations yet; the columns the list
    does not need are still being read (``StoredResults.numbers_ready``, ``complete``).  A backtest the file
    holds against another ledger is left out (``fitcore.ledger.elsewhere``, as ``show --ledger`` leaves it out)."""
    from fitcore.ledger.elsewhere import backtested_elsewhere, head_gone
    from fitcore.ledger.reader import opening
    book = opening(ledger_path, key)  # read and verified meanwhile: Arrow reads the results without the interpreter
    watched = ResultsWatch(Path(path))  # before reading: a fit putting new results in place meanwhile is caught
    results, diagnosis = stored_results(path, later=True)
    head = {k: v for k, v in read_header(path).items() if k != "key_columns"}
    book = book()
    if book.records:  # the list shows a decided series' model and score, a stale one's due: from every candidate's
        results.later.wait_soon()  # numbers (``stored.SOON``), a failure to read them said before the screen
    # the file's backtest left out where it read another ledger, or records this one no longer holds (an older
    # copy put back, its end cut: ``head_gone``), said on the header as show --ledger says it
    elsewhere = backtested_elsewhere(path, head, Path(ledger_path)) or head_gone(path, head, book.records,
                                                                                 Path(ledger_path))
    session = TriageSession(results, diagnosis, ledger_path, who, results_digest(head), key, units=units, book=book,
                            elsewhere=elsewhere)
    session.results_watch = watched
    session.fitted_elsewhere = fitted_elsewhere(fitted_ledger(head), Path(ledger_path))
    return session


def sample_source(controls: tuple[str, ...] = (), season: int = 0) -> Source:
    """The bundled sample; ``controls`` (its ``promo`` column) and ``season`` pairs held fixed if asked."""
    if not (SAMPLE / "wholesale.csv").exists():
        raise DataError("the bundled sample is not here; run pricefold from a source checkout", path=str(SAMPLE))
    return Source(data=SAMPLE / "wholesale.csv", columns=Columns(segments=("region",), date="week", controls=controls),
                  settings=FitSettings(season=season), plan_file=SAMPLE / "plan.csv")
