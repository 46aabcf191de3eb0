"""``pricefold report``: one self-contained HTML page of a sign-off, for people without a terminal.

Reads the results (a JSON or Parquet file, or a Dask results folder), the ledger (default as in
triage) and, for the charts, the data the results name (refitted as triage does; when the data
changed or are missing, the charts show the curves without observations).  Writes the page to a
temporary file and renames it: a failed run leaves an earlier report as it was.
"""
from __future__ import annotations

import sys
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path

from fitcore.errors import DataError, SettingsError

REPORT_LISTS = 5000  # the signed series not in the results the page names, one each (then "… and N more")

INSTALL_HINT = ("the report's charts need matplotlib: pip install matplotlib (or, in the checkout, "
                "pip install -e '.[report]')")
REFIT_ROWS = 50_000_000  # as triage: above this many rows the data are not read for the charts


def add_parser(commands) -> None:
    from ..options import OneFile
    parser = commands.add_parser(
        "report", help="write a self-contained HTML sign-off report of results and their ledger",
        description="One HTML page for the people who approve the plan: the summary, the decisions, and every "
                    "exception in full with its chart. The page loads nothing from anywhere and prints on A4 or "
                    "Letter.")
    parser.add_argument("results", type=Path, metavar="RESULTS", help="a .json or .parquet results file or folder")
    parser.add_argument("--ledger", type=Path, default=None, metavar="FILE",
                        help="the sign-off ledger (default: <results name>.ledger.jsonl beside it)")
    parser.add_argument("-o", "--output", action=OneFile, required=True, metavar="REPORT.html",
                        help="the page to write")
    parser.add_argument("--title", default=None, metavar="TEXT", help="the page's title (default: from the results)")


def read_ledger(path: Path, key: bytes | None):
    """The ledger as the report reads it (``fitcore.ledger.Ledger``, verified as read): its state,
    head, first problem and records — for a broken ledger, those after the break too."""
    from fitcore.ledger import Ledger
    from fitcore.ledger.signoff import LedgerView
    book = Ledger(path, key)
    if not book.exists:
        return LedgerView(str(path), "absent")
    records = tuple(book.records)
    kind = next((r.get("digest_kind") for r in reversed(records)), None)
    if book.problem is not None:
        return LedgerView(str(path), book.state, records, book.head_text if records else None, str(book.problem),
                          kind)
    remark = (f"The ledger ends in an interrupted append ({'; '.join(map(str, book.notes))}); it is left out, and "
              "the next append sets it aside." if book.notes else None)  # every note: a torn line after a batch too
    return LedgerView(str(path), book.state, records, book.head_text if records else None, remark, kind)


@dataclass(frozen=True)
class Book:
    """The results to report (``results``, ``diagnosis``, ``header``) and, for the charts, either a
    fit of the data (``fit``: JSON results are that fit) or the ``source`` to fit the charted series
    from; neither when the data are missing or changed (``data_note`` says which)."""

    results: object
    diagnosis: object
    header: dict
    fit: object
    data_note: str | None
    source: object = None


def fit_subset(source, keys: list[dict]):
    """A fit of only the series ``keys`` name, from the source's data.

    Each series is fitted on its own rows alone (folds are dealt per series, whatever else shares
    the file), so its numbers are those of the whole fit, for a fraction of the time
    (``fitcore.results.source.Reading.fit``, as triage fits the series on screen first).
    """
    import numpy as np

    from fitcore.data.keys import SeriesKeys
    from fitcore.results.source import read_source
    reading = read_source(source)
    where = SeriesKeys.of(reading.data).indices_of(keys)
    return reading.fit(series=np.unique(where[where >= 0]))[0]


def open_book(path: Path) -> Book:
    """Read the results; refit their data for the charts when it is still what they were fitted on."""
    from fitcore.data.columns import file_sha256
    from fitcore.results.read import read_header, read_results
    from fitcore.results.stored import stored_results
    from fitcore.results.source import fit_source, is_stored, source_from_results

    stored = is_stored(path)
    header = {k: v for k, v in read_header(path).items() if k != "key_columns"} if stored else read_results(path)[0]
    data = Path(str(header.get("input", {}).get("path", "")))
    why = None
    if not data.exists():
        why = f"the data file {data} the results were fitted from is missing"
    elif file_sha256(data) != header.get("input", {}).get("sha256"):
        why = f"the data file {data} changed since the results were written"
    elif (header.get("input", {}).get("rows") or 0) > REFIT_ROWS:
        why = f"the data file {data} is too large to read for the charts"
    if not stored:  # a JSON results file holds no window coefficients: its numbers come from refitting its data
        if why:
            raise DataError(f"{why}; a JSON results file is reported by refitting its data (write Parquet results "
                            "to report without them)", path=str(path))
        results, diagnosis = fit_source(source_from_results(path, check_data=False))
        return Book(results, diagnosis, header, results, None)
    results, diagnosis = stored_results(path)
    source = None if why else source_from_results(path, check_data=False)
    return Book(results, diagnosis, header, None, why and why[0].upper() + why[1:] + ".", source)


def with_backtest(book: Book, view, ledger_path: Path, histories: dict):
    """``(diagnosis, backtest)``: the signed curves against the rows since sign-off, as the triage screen
    shows them (``fitcore.ledger.backtest.standing_cycle_of``): ``shifted`` joins the flags, and ``backtest``
    (None: nothing tested) gives each stale series' numbers — neither where the decision tested no longer
    stands.  ``histories``: the ledger's replay."""
    from fitcore.ledger.backtest import standing_cycle_of
    source = {"path": str(ledger_path), "head": view.head, "state": view.state}
    return standing_cycle_of(book.results, book.diagnosis, histories, source)


def guard_output(output: Path, inputs: list[tuple[str, Path | None]]) -> None:
    """Never write over an input, and never over a file this command did not make (``fitcore.outputs``)."""
    from fitcore.outputs import check_outputs
    if output.suffix.lower() not in (".html", ".htm"):
        raise SettingsError(f"expected -o to name an .html file, got {output.name!r}")
    check_outputs([(output, "report")], inputs)


PARALLEL_FROM = 40  # charts: from this many on, two processes draw them (matplotlib spends 30–60 ms a chart)
_CHARTS = None  # the Charts a forked worker draws from (inherited, not pickled)


def _draw_some(series: list[int]) -> list:
    return [_CHARTS.draw(s) for s in series]


def _with_parent(parent: int) -> None:
    """A drawing process ends with the report's (killed, it left them drawing, then waiting for work, for ever):
    the kernel's parent-death signal where there is one (Linux), and an orphan at its start ends at once."""
    import ctypes
    import os
    import signal
    try:
        ctypes.CDLL(None, use_errno=True).prctl(1, int(signal.SIGKILL))  # PR_SET_PDEATHSIG
    except (AttributeError, OSError):  # no prctl here
        pass
    if os.getppid() != parent:  # the report ended before the line above
        os._exit(1)
    # a signal is the report's to say (``interrupts``): here each as it always was, without a line of its own
    signal.signal(signal.SIGINT, signal.default_int_handler)
    for number in (signal.SIGTERM, signal.SIGHUP):
        signal.signal(number, signal.SIG_DFL)


class Charts:
    """Series index → its chart (``Drawn``), from the fit of the data where it matches the results.

    Every chart is drawn up front (``draw_all``); with many, two forked processes share the work,
    each on its own matplotlib figure, since one chart is tens of milliseconds of Python.
    """

    def __init__(self, book: Book, signoff, series, tell_apart=None) -> None:
        from fitcore.data.keys import SeriesKeys
        self.book, self.signoff, self.maker, self.tell_apart = book, signoff, None, tell_apart
        self.series = [int(s) for s in series]
        self._found, self._drawn, self.fit = {}, {}, book.fit
        if book.source is not None and self.series:  # fit the charted series only; find them in that fit
            keys = [book.results.data.key_of(s) for s in self.series]
            self.fit = fit_subset(book.source, keys)
            self._found = dict(zip(self.series, SeriesKeys.of(self.fit.data).indices_of(keys).tolist()))

    def draw_all(self) -> None:
        global _CHARTS
        import os
        workers = min(2, len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count() or 1)
        if len(self.series) < PARALLEL_FROM or workers < 2:
            self._drawn = {s: self.draw(s) for s in self.series}
            return
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor
        from concurrent.futures.process import BrokenProcessPool
        halves = [self.series[k::workers] for k in range(workers)]
        _CHARTS = self
        try:
            with ProcessPoolExecutor(workers, mp_context=multiprocessing.get_context("fork"), initializer=_with_parent,
                                     initargs=(os.getpid(),)) as pool:
                for half, drawn in zip(halves, pool.map(_draw_some, halves)):
                    self._drawn.update(zip(half, drawn))
        except (BrokenProcessPool, OSError):  # no processes to be had here: draw them all in this one
            from ..interrupts import check
            check()  # unless Ctrl+C or a kill ended them (recorded only, beside the pool's threads): stop
            self._drawn = {s: self.draw(s) for s in self.series}
        finally:
            _CHARTS = None

    def __call__(self, s: int):
        return self._drawn[s] if s in self._drawn else self.draw(s)

    def draw(self, s: int):
        from fitcore.ledger.signoff import STATUSES

        from .charts import ChartInput, ChartMaker, Drawn
        from .tables import label
        if self.maker is None:
            self.maker = ChartMaker()
        book, signoff = self.book, self.signoff
        standing, proposal = signoff.model_index(s), int(book.results.chosen[s])
        if standing < 0 and proposal < 0:
            return Drawn("")
        fit, at, note = book.results, s, book.data_note or ""
        if self.fit is book.results:
            rows = True
        elif self.fit is not None:
            found = self._found.get(s, -1)
            same = found >= 0 and self.fit.data.fingerprint_of(found) == book.results.data.fingerprint_of(s)
            fit, at, rows = (self.fit, found, True) if same else (book.results, s, False)
            note = "" if same else "this series' rows changed since the results were written"
        else:
            rows = False
        status = STATUSES[signoff.status[s]]
        words = {"accepted": "accepted", "overridden": "override", "held": "held",
                 "pending": "proposal", "stale": f"signed on {'newer' if signoff.newer[s] else 'earlier'} data"}[status]
        # a stale series' curve is drawn as signed (its snapshot); without one (a /1 record) none is drawn
        signed = (signoff.standing(s) or {}).get("signed") if status == "stale" and standing >= 0 else None
        if status == "stale" and not signed:
            standing = -1
        chart = ChartInput(fit, at, rows and bool(fit.rows_loaded), standing, proposal, words, signed)
        title = f"Demand curve of {label(book.results, s, self.tell_apart)}"
        return self.maker.draw(chart, title, note, salt=f"s{s}")


def results_apart(results, histories: dict, signoff, ledger_path: Path) -> tuple[tuple[str, ...], object]:
    """Where the results and the ledger part, each in the commands' one clause: the ledger's signed series not in
    the results (``fitcore.ledger.missing``), and the results' series that look like its own under another spelling
    (``fitcore.ledger.respelling``) — what an approver reading "34 pending" would not otherwise learn; and those
    missing series (a ``fitcore.ledger.missing.Missing``: its keys as shown, which the page's series are told apart
    from, ``shown``; each named a line, ``listed``).  The sentences
    hold shown forms (look-alikes told apart): the page shows them through ``printable``, as the commands print
    them, not ``clean`` again, which would escape a shown form's ``⟨`` itself."""
    import numpy as np

    from fitcore.data.keys import SeriesKeys
    from fitcore.ledger.missing import NONE, RENAMED, missing_at, results_values, signed_keys

    from ..fit_ledger import signed_alike
    if not histories:
        return (), NONE
    keys = SeriesKeys.of(results.data)
    names = tuple(keys.names)
    signed = signed_keys(histories, names)
    at = keys.indices_of(signed) if signed else np.zeros(0, np.int64)
    shared = bool(signoff.histories)  # series index → history: those of the ledger's series these results hold
    gone = missing_at(signed, at, names, shared)
    alike = None
    if shared:
        ledger_keys = [h.latest["series"] for h in histories.values()]
        looks = signed_alike(keys, ledger_keys, keys.indices_of(ledger_keys))
        gone = gone.beside(results_values(keys)) if len(gone) else gone
        alike = looks.said(str(ledger_path))
    missing = gone.said(str(ledger_path))
    return tuple(said for said in (missing and f"{missing}; {RENAMED}", alike) if said), gone


def version() -> str:
    from importlib.metadata import PackageNotFoundError
    from importlib.metadata import version as installed
    try:
        return installed("pricefold")
    except PackageNotFoundError:
        return "(source)"


def run(args) -> int:
    import logging
    # matplotlib's own "mkdir -p failed … created a temporary cache directory" where HOME is not writable (a trial):
    # it then works in a temporary folder, as the report needs nothing cached
    logging.getLogger("matplotlib").setLevel(logging.ERROR)
    try:
        import matplotlib  # noqa: F401 - only to say at once what is missing
    except ImportError:
        raise SettingsError(INSTALL_HINT) from None
    from fitcore.ledger.signoff import STATUSES, gather
    from fitcore.results.source import default_ledger
    from fitcore.text import told_apart_from

    __version__ = version()
    from ..ledger_cli import ledger_key
    from ..ledger_export import write_text
    from .exceptions import exceptions
    from .page import Report, alerts, caution_of, document, esc, summary
    from .tables import decisions, people

    if not args.results.exists():
        raise DataError("file not found", path=str(args.results))
    if args.ledger is not None:  # a ledger named but not there is a mistyped name, not "nothing decided yet"
        from ..fit_ledger import must_exist
        must_exist(args.ledger, "'report --ledger' only reads it; without --ledger the one beside the results is read")
    ledger_path = args.ledger or default_ledger(args.results)
    guard_output(args.output, [("the results", args.results), ("the ledger", ledger_path)])
    book = open_book(args.results)
    if args.ledger is None:  # a later cycle's results: the default beside them is not their ledger
        from fitcore.ledger.elsewhere import fitted_ledger

        from ..ledger_choice import default_for
        default_for(args.results, fitted_ledger(book.header or {}), reads=True)
    from fitcore.outputs import check_not_input
    from fitcore.results.read import results_inputs
    check_not_input(args.output, results_inputs(book.header))  # the data and plan the results name
    view = read_ledger(ledger_path, ledger_key())
    from fitcore.ledger.elsewhere import HEAD_GONE_TAIL, head_gone
    gone = head_gone(args.results, book.header, list(view.records), ledger_path)
    if gone:  # said first, as the page does
        print(f"pricefold report: warning: {gone}; {HEAD_GONE_TAIL}", file=sys.stderr)
    from fitcore.ledger.replay import replay
    histories = replay(list(view.records))  # once, for the backtest and the sign-off tallies
    diagnosis, backtest = with_backtest(book, view, ledger_path, histories)
    signoff = gather(book.results, diagnosis, list(view.records), histories)
    decided, flagged, more = signoff.detailed()
    apart, missing = results_apart(book.results, histories, signoff, ledger_path)
    tell_apart = told_apart_from(missing.shown())  # a series reading like one the summary names missing: told apart
    charts = Charts(book, signoff, [*decided.tolist(), *flagged.tolist()], tell_apart)
    charts.draw_all()
    for said in apart:  # as every command where results meet a ledger says it
        print(f"pricefold report: {args.results}: note: {said}", file=sys.stderr)
    made = datetime.now(timezone.utc)
    title = args.title or f"Sign-off report: {args.results.name}"
    report = Report(title, made, str(args.results), book.header, signoff, view, book.data_note,
                    charts, __version__, backtest, apart, tell_apart,
                    tuple(missing.listed(REPORT_LISTS)) if missing.said() else (), gone)
    detailed = {int(s) for s in decided} | {int(s) for s in flagged}
    body = (f"<header><h1>{esc(title)}</h1><p class=\"muted\">Made {made.strftime('%Y-%m-%d %H:%M UTC')} by "
            f"pricefold {esc(__version__)} from <code>{esc(args.results)}</code> and the ledger "
            f"<code>{esc(ledger_path)}</code>.</p></header>{alerts(report)}{summary(report)}{people(report)}"
            f"{decisions(report, detailed)}{exceptions(report, decided, flagged, more)}"
            f"<footer class=\"caution\"><p>{esc(caution_of(report.header))}</p></footer>")
    from fitcore.outputs.seal import seal
    page = seal(document(report, body))
    write_text(args.output, page)
    counts = signoff.counts()
    print(f"report of {counts['total']:,} series ({', '.join(f'{counts[s]:,} {s}' for s in STATUSES if counts[s])}; "
          f"ledger {view.state}) → {args.output} ({len(page.encode('utf-8')) / 1e6:.1f} MB)", file=sys.stderr)
    if view.state == "intact" and view.problem:  # as every other command says an interrupted tail
        print(f"pricefold report: {view.path}: note: {view.problem}", file=sys.stderr)
    return 0

