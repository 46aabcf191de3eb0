"""``pricefold triage``: the screen opened on a data file, a results file or stored Parquet results, and the
checks before it opens (the ledger is none of its inputs; without --ledger, the default beside results fitted
against another ledger is refused: ``ledger_choice``); ``open_triage`` also serves the demo."""
from __future__ import annotations

import sys
from pathlib import Path

from fitcore.collector import collector_paused


def run_triage(args) -> int:
    with collector_paused():
        return _run_triage(args)


def is_results(path: Path) -> bool:
    from fitcore.data.columns import is_parquet_name
    from fitcore.results.read import result_parts
    if result_parts(path) is not None:
        return True
    if path.suffix.lower() == ".json":
        return True
    if is_parquet_name(path) and path.is_file():
        import pyarrow.parquet as pq
        try:
            return b"pricefold" in (pq.read_schema(path).metadata or {})
        except Exception:  # not a readable Parquet file: the loader will say so
            return False
    return False


def _run_triage(args) -> int:
    from dataclasses import replace

    from fitcore.data.config import load_config
    from fitcore.outputs import check_not_input
    from fitcore.results.source import Source, default_ledger, is_stored, source_from_results

    from .ledger_choice import default_for
    from .options import resolve, settings_file_keys
    units = load_config(args.config, settings_file_keys()).get("units", {})
    if is_stored(args.source):  # Parquet results: open them as they are, read the observations behind the screen
        source = source_from_results(args.source, check_data=False)
        ledger_path = args.ledger or default_for(args.source, source.fitted_ledger)
        check_not_input(ledger_path, [("the results", args.source), *_source_inputs(source)])
        source.units, source.sep = units, _separator(args)  # fitted against another ledger: the header says it
        return open_triage(source, ledger_path, args.analyst, stored=args.source)
    if is_results(args.source):
        source = source_from_results(args.source)
        ledger_path = args.ledger or default_for(args.source, source.fitted_ledger)
        source.sep = _separator(args)
        inputs = [("the results", args.source), *_source_inputs(source)]
    else:
        run = resolve(args)
        ledger_path = args.ledger or default_ledger(args.source)
        if not args.source.exists():
            from fitcore.errors import DataError
            raise DataError("file not found", path=str(args.source))
        from fitcore.data.columns import is_parquet_name
        if is_parquet_name(args.source):  # a damaged or cut file said in one line here, not in the screen's dialog
            from fitcore.data.read_parquet import parquet_schema
            parquet_schema(args.source)
        source = Source(data=args.source, columns=run.columns, settings=replace(run.settings, extra={}),
                        plan_file=run.plan_file, plan_price=run.plan_price, thresholds=run.thresholds, sep=run.sep)
        inputs = [*_source_inputs(source), *run.inputs]
    check_not_input(ledger_path, inputs)
    source.units = units  # fitted against another ledger than --ledger: the header says it (``tui.factory``)
    from fitcore.outputs import unfinished
    source.warnings.extend(unfinished(args.source))  # said before the screen too, where it is gone once it opens
    return open_triage(source, ledger_path, args.analyst)


def _separator(args) -> str | None:
    """``--sep`` for the data a results file names (read by the option's own reader, as ``fit`` reads it)."""
    from fitcore.fit.settings import OPTIONS
    option = next(o for o in OPTIONS if o.name == "sep")
    return option.value(args.sep) if getattr(args, "sep", None) is not None else None


def _source_inputs(source) -> list:
    """The files a triage session reads, which its ledger must not be."""
    return [("the data", source.data), ("the plan file", source.plan_file)]


# Above this many input rows, triage on stored results does not refit the data for the observations
# (the local engine needs ~150 bytes a row).
REFIT_ROWS = 50_000_000


def open_triage(source, ledger_path: Path, analyst: str | None, stored: Path | None = None, prepare=None) -> int:
    """The triage app on a fit of ``source``, or on the ``stored`` results file (then fit behind the screen,
    after ``prepare()`` when given: the demo's compiling in another process).  Without a terminal, one line
    at once (a screen drawn into a pipe would wait for a key nobody can press); a session that could not be
    opened ends as one line too, after its dialog."""
    from fitcore.errors import PricefoldError

    from .ledger_cli import refuse_not_a_ledger
    refuse_not_a_ledger(ledger_path)  # after the inputs' checks: a ledger that is an input is said as such
    from .terminal import drawn_on_the_terminal, require_terminal
    require_terminal("the triage screen")
    app = triage_app(source, ledger_path, analyst, stored, prepare)
    with drawn_on_the_terminal():
        app.run()
    if app.failure is not None:
        raise PricefoldError(app.failure)
    if app.return_code == 130 and not app.note_lost:
        print("pricefold triage: interrupted before the list was shown; nothing was recorded", file=sys.stderr)
        return 130
    if app.stopped_by is not None or app.note_lost:  # a kill, the terminal gone, or Ctrl+C dropping a typed note:
        import signal  # one line where there is still somewhere to say it
        how = f"stopped by {signal.Signals(app.stopped_by).name}" if app.stopped_by is not None else "interrupted"
        try:
            print(f"pricefold triage: {how}; "
                  + (f"decisions are in {ledger_path}" if ledger_path.exists() else "nothing was recorded")
                  + (" (the note being typed was not recorded)" if app.note_lost else ""), file=sys.stderr)
        except OSError:
            pass
        return 128 + app.stopped_by if app.stopped_by is not None else 130
    if ledger_path.exists():  # after a failure before any decision there is no ledger to point to
        print(f"decisions are in {ledger_path}", file=sys.stderr)
    return app.return_code or 0


def accept_command(results: Path | None, data: Path, ledger_path: Path) -> str:
    """The command that accepts the unflagged series of the screen's results into its ledger, as typed in this
    shell (the screen says it where its list empties with such series pending); on a data file, which names no
    results file, the fit that writes one first."""
    import shlex

    from .demo import typed_command
    pricefold = typed_command()
    accept = f"{pricefold} ledger accept-unflagged {{}} --ledger {shlex.quote(str(ledger_path))}"
    if results is not None:
        return accept.format(shlex.quote(str(results)))
    return (f"{pricefold} fit {shlex.quote(str(data))} (with this screen's options) -o RESULTS, then "
            + accept.format("RESULTS"))


def triage_app(source, ledger_path: Path, analyst: str | None, stored: Path | None = None, prepare=None):
    """The app ``open_triage`` runs.  On stored results whose data file is gone (or too large to read here),
    the session opens from the stored numbers alone and says why there are no observations."""
    from fitcore.results.read import read_header
    from fitcore.results.source import refit_stored
    from tui.factory import open_session, open_stored_session
    from tui.opening import Opening

    from .ledger_cli import identity, ledger_key
    who, key = identity(analyst), ledger_key()
    command = accept_command(stored or source.results, source.data, ledger_path)
    if stored is None:
        from tui.app import TriageApp

        def fitted(progress):
            session = open_session(source, ledger_path, who, key, progress)
            session.accept_command = command
            return session
        return TriageApp(fitted)
    rows = read_header(stored).get("input", {}).get("rows") or 0
    unobserved = None
    if not source.found:
        unobserved = f"the data file {source.data} was not found: observations and the refit are unavailable"
    elif rows > REFIT_ROWS:
        unobserved = f"the data behind these results have {rows:,} rows, too many to read here: no observations"

    def refit(progress, first=None):
        if prepare is not None:
            prepare()
        return refit_stored(source, progress, first)

    def opener(progress):
        session = open_stored_session(stored, ledger_path, who, key, progress, units=source.units)
        session.accept_command = command
        session.warnings.extend(source.warnings)
        if unobserved is not None:
            session.unobserved = unobserved
            session.warnings.append(f"{unobserved[0].upper()}{unobserved[1:]}; the list and the evidence show the "
                                    "results as the file holds them.")
        return session
    opening = Opening(opener)  # the results read while the app's modules load (Arrow lets go of the interpreter)
    from tui.app import TriageApp
    return TriageApp(opening, observer=refit if unobserved is None else None)
