"""``pricefold fit`` on this machine: guard the outputs, load, fit, diagnose, then write the rejects file
and the results as one step.

Order of events, so that a failed or killed run leaves the earlier results and rejects file exactly as
they were: every output is checked against every input before anything is read; the rejects file is
staged (written in full under a temporary name) right after loading, its digest recorded in the
results' ``input``; the results are staged after the fit; then the rejects file and the results are
put in place, in that order, with (on a clean run) the replaced results' own rejects file removed in the same
step (the file whose digest they record: ``earlier_rejects``; any other is left, saying so).  That step is one
even under ``kill -9``: the next run writing these names first finishes a step a killed run left half done
(``outputs.finish_batches``) and removes its temporary files.
"""
from __future__ import annotations

import sys
import time
from pathlib import Path

from .interrupts import check, checked, in_place, noticed
from .summary import rejects_line, summary_line

JSON_SERIES = 5_000  # above this, the progress line says JSON is slow to write (Parquet is the format at scale)


def run_fit(args) -> int:
    from fitcore.data.rejects import rejects_path
    from fitcore.outputs import check_outputs

    from .options import resolve
    run = resolve(args)
    if args.config is None and run.config_path:  # found, not named: a file in the folder changes the fit unseen
        print(f"note: settings from {run.config_path} (the current folder's settings file; --config names another)",
              file=sys.stderr)
    if args.engine == "dask":
        from .fit_dask import run_fit_dask
        return run_fit_dask(args, run)
    _check_ending(args.output)
    keep_freed_memory()  # before anything loads pyarrow (checking the outputs may)
    inputs = [("the data", args.data), *run.inputs]
    if getattr(args, "ledger", None) is not None:
        inputs.append(("the ledger", args.ledger))
    check_outputs([(args.output, "results"), (rejects_path(args.output), "rejects")], inputs)
    settle_earlier(args.output, rejects_path(args.output))
    return fit_locally(args, run)


def settle_earlier(*paths: Path) -> None:
    """Finish what a killed run left half in place at ``paths`` (saying so), then remove its temporary files."""
    from fitcore.outputs import finish_batches, remove_leftovers
    for path in paths:
        for line in finish_batches(path):
            print(line, file=sys.stderr)
    for path in paths:
        remove_leftovers(path)


def _check_ending(output: Path) -> None:
    from fitcore.data.columns import is_parquet_name
    from fitcore.errors import DataError
    if output.suffix.lower() != ".json" and not is_parquet_name(output):
        raise DataError(f"expected the results file to end in .json or .parquet, got {output.name!r}",
                        path=str(output))


def fit_locally(args, run) -> int:
    ahead = None
    if getattr(args, "ledger", None) is not None:  # read and verified beside the load and the fit
        from .fit_ledger import LedgerAhead
        ahead = LedgerAhead(args.ledger, [args.output])  # forks: before any thread starts (a fork while the
        # warm-up thread held an import lock left the child waiting on that lock for ever)
    warm = warm_engine()  # loads the compiled loops while the data are read
    try:
        with noticed():  # Ctrl+C recorded, so that nothing is put in place after one, even one swallowed
            return _fit_locally(args, run, ahead)
    finally:
        if warm is not None:
            warm.join()  # never left running at exit


def keep_freed_memory() -> None:
    """Ask glibc's malloc to keep freed memory for the next allocation instead of handing it back to the
    system at once: the fit allocates and frees large work arrays chunk after chunk, and every page
    handed back is a page fault when taken again (7M rows: system time 1.3–2.8 s → 1.0–1.2 s, peak
    memory no higher).  Nor is a large block its own mapping (glibc's default from 128 KiB, fixed there
    once the other two settings are made; unmapped when freed): the main thread's arrays come from the
    heap it keeps (7M rows: page faults 250k → 147k, system time 0.71 → 0.52 s, peak memory +4–8 MiB;
    other threads' arenas still map what does not fit them).  Elsewhere than glibc, nothing happens.

    With glibc, Arrow allocates from that same malloc too (``arrow_on_malloc``)."""
    import ctypes
    try:
        libc = ctypes.CDLL(None)
        libc.mallopt(-1, 1 << 30)  # M_TRIM_THRESHOLD: give back only above 1 GiB free at the top
        libc.mallopt(-2, 256 << 20)  # M_TOP_PAD: grow the heap 256 MiB at a time
        libc.mallopt(-4, 0)  # M_MMAP_MAX: no block mapped on its own
    except (OSError, AttributeError):
        return
    arrow_on_malloc()


def arrow_on_malloc() -> None:
    """Have Arrow allocate from malloc (its system pool), not from a pool of its own: memory the read's
    Arrow tables free is then reused by the fit's arrays, and memory numpy frees by the results' columns
    (7M rows: peak 805 → 720 MiB, CPU time no higher).  Arrow reads its choice as it loads: with pyarrow
    not loaded yet, the variable is set for that moment only (never passed to another process); loaded
    already, its Python functions are told (``set_memory_pool``: most, not all, of its allocations).  A
    pool chosen in the environment is left as chosen."""
    import os
    import sys
    name = "ARROW_DEFAULT_MEMORY_POOL"
    if name in os.environ:
        return
    if "pyarrow" not in sys.modules:
        os.environ[name] = "system"
        try:
            import pyarrow  # noqa: F401
        finally:
            del os.environ[name]
    import pyarrow as pa
    pa.set_memory_pool(pa.system_memory_pool())


def warm_engine():
    """A thread loading numba's cached loops by fitting a few invented series, then ``pyarrow.compute``,
    started while this thread reads the data (pyarrow reads without holding the interpreter); None when the
    cache does not hold them yet: then the fit compiles them itself, as before, and a failure to read
    the data ends the run without waiting for a compiler."""
    import threading

    from fitcore.compiled import looks_compiled
    if not looks_compiled():
        return None
    thread = threading.Thread(target=_fit_invented, name="pricefold-warm", daemon=True)
    thread.start()
    return thread


def compiling_note(controlled: bool) -> None:
    """Say that the fit compiles the engine's loops first (once after an install: ~9 s here; a fit with controls
    or season terms has loops of its own, ~7–9 s) where numba's cache does not hold them: the screen stayed blank
    that long, the progress line only at its end, and the engine read as seven times slower than it is (a trial)."""
    from fitcore.compiled import looks_compiled
    if not (looks_compiled("controlled", "controlled_fit") if controlled else looks_compiled()):
        print("note: compiling the engine's loops first (once after an install"
              f"{' for fits with controls or season terms' if controlled else ''}: about 10 s; later runs load "
              "them from numba's cache)", file=sys.stderr)


def _fit_invented() -> None:
    import numpy as np

    from fitcore import fit_batch, from_columns
    from fitcore.data.key_codes import KeyCodes
    from fitcore.fit.settings import FitSettings
    from fitcore.review.flags import diagnose
    rng = np.random.default_rng(0)
    price = rng.uniform(1.0, 2.0, 8 * 24)
    product = KeyCodes(np.repeat(np.arange(8, dtype=np.int32), 24), np.arange(8).astype(str).astype(object))
    data = from_columns({"product": product}, price, np.round(100 * price ** -1.5 * rng.uniform(0.8, 1.2, len(price))))
    try:
        diagnose(fit_batch(data, FitSettings()))
    except Exception:  # only a warm-up: the real fit meets and reports any trouble itself
        pass
    # Then ``pyarrow.compute`` (0.035 s), which the results' text columns need (Arrow's dictionary encoding, the
    # flags' joins): imported here, after the loops the fit waits for, rather than on the way to the write.
    import pyarrow.compute  # noqa: F401


def _fit_locally(args, run, ahead) -> int:
    from fitcore import fit_batch
    from fitcore.data.loader import load_with_rejects, unread_columns_note
    from fitcore.data.plan import plan_keywords, unused_columns_note
    from fitcore.data.rejects import rejects_path, write_rejects
    from fitcore.outputs import Batch
    from fitcore.results.write import prepared_results
    from fitcore.review.flags import diagnose
    from fitcore.text import clean

    from .earlier_rejects import earlier_rejects
    from .progress import ProgressLine

    started = time.perf_counter()
    line = ProgressLine("fitting", enabled=None if not args.quiet else False)  # what is being done, on a terminal
    try:
        line.say(f"reading {clean(args.data.name)} …")
        data, rejects = load_with_rejects(args.data, run.columns, sep=run.sep)
        check()  # an interrupt recorded while the warm-up ran
        free, read = zero_price_line(data, args.data, run.columns.price), data.source["rows"]
        target = rejects_path(args.output)
        earlier = earlier_rejects(target, args.output)  # before the results it sits beside are replaced
        if len(rejects):
            strict_or_foreign(rejects, earlier, args.strict, run.columns)
        with Batch() as batch:
            if len(rejects):
                staged = batch.add(target, lambda handle: write_rejects(rejects, handle))
                data.source.update(rejects_file=target.name, rejects_sha256=staged.sha256)
            else:
                data.source.update(rejects_file=None, rejects_sha256=None)
                if earlier.owned:  # the replaced results' own rejects would now mislead: removed with the step
                    batch.remove(target, earlier.sha256)
            # the plan's own delimiter; with controls, its control columns and plan dates
            plan = plan_keywords(data, run.plan_file, run.plan_price, season=run.settings.season)
            line.close()
            if line.enabled:  # for the person waiting, not a log
                compiling_note(bool(data.controls) or bool(run.settings.season))
            try:
                results = fit_batch(data, run.settings, **plan, progress=checked(line))
            finally:
                line.close()
            line.say("checking the curves …")
            diagnosis = diagnose(results, run.thresholds)
            line.close()  # (the ledger's backtest may say something: on a line of its own)
            backtest, missed = None, False
            if ahead is not None:  # the signed curves against the rows since, and the shifted flag
                from .fit_ledger import backtest_against
                diagnosis, backtest, missed = backtest_against(ahead, results, diagnosis, run.thresholds)
            told = summary(results, diagnosis)
            unplanned = unplanned_line(results, run.plan_file) if run.plan_file is not None else ""
            unused = "" if run.plan_file is None else unused_columns_note(
                run.plan_file, tuple(data.key_names), tuple(data.controls), bool(run.settings.season))
            fitted = time.perf_counter()  # read, fitted and diagnosed: the writing is timed apart
            slow = (args.output.suffix.lower() == ".json" and results.n_series > JSON_SERIES) * (
                " (JSON: slow past a few thousand series; Parquet is faster)")  # 800k rows: 11 s vs 0.3 s
            line.say(f"writing {clean(args.output.name)} …{slow}")
            write, by_name = prepared_results(results, args.output, diagnosis, backtest)
            # What the table takes per series is made; it keeps the fit and the rows it still needs (prices): the
            # rest of the rows freed before it is built, slice by slice, as the file is written.
            del data, plan, results, diagnosis  # (``backtest``: per-series arrays, kept for its closing line)
            batch.add(args.output, write, by_name=by_name)
            check()  # interrupted, though something swallowed it: the staged files are dropped
    finally:  # cleared before any line is said, an error's too
        line.close()
    in_place([str(target)] * bool(len(rejects)) + [str(args.output)])  # a signal now: said after them, at the end
    if not len(rejects) and earlier.exists and not earlier.owned:
        print(f"note: {target} left as it was: {earlier.why}; this run rejected no row", file=sys.stderr)
    if len(rejects):  # a warning, not progress: --quiet keeps it
        most = 2 * len(rejects) > read  # then where the first is and why (its cell read again from the file)
        print(rejects_line(rejects.reasons, target, read, first_words(rejects, run.columns) if most else ""),
              file=sys.stderr)
    unread = unread_columns_note(rejects.path, rejects.unread, run.columns)
    for warning in (unread, free, unplanned, unused):  # warnings too
        if warning:
            print(warning, file=sys.stderr)
    if not args.quiet:
        print(told(fitted - started, f"{args.output} (written in {time.perf_counter() - fitted:.2f} s)"),
              file=sys.stderr)
        if backtest is not None:
            from .fit_ledger import backtest_line
            print(backtest_line(backtest, missed), file=sys.stderr)
    check()  # a signal after the files were in place: said so, with its exit status
    return 0


def strict_or_foreign(rejects, earlier, strict: bool, columns) -> None:
    """Fail before anything is written: ``--strict`` with rejected rows, or the rejects file's name taken by a
    file that is not the rejects of the results this run replaces (``earlier``: ``earlier_rejects``)."""
    from fitcore.data.validation import summary as rejects_summary
    from fitcore.errors import DataError
    if strict:
        from fitcore.data.loader import first_rejected, place
        column, said = first_rejected(rejects, columns)
        raise DataError(f"{said} ({rejects_summary(rejects.reasons)}; --strict, so nothing was written)",
                        path=str(rejects.path), column=column, **place(rejects.kind, int(rejects.lines[0])))
    if earlier.exists and not earlier.owned:
        raise DataError(f"exists, and {earlier.why}; this run has rejected rows to write there: remove it or "
                        "choose another results name (nothing was written)", path=str(earlier.path))


def zero_price_line(data, path: Path, column: str) -> str:
    """A warning when some kept rows have a price of 0 (a price is checked for being a number and not
    negative: a polynomial can use 0, and exact reference data sets put x = 0 through the command), as a
    missing price written as 0 would be: how many rows in how many series, and what it does to the fit.  Rows
    of weight 0 are not counted: they are no observation, and no curve is made unavailable by them."""
    import numpy as np
    zero = np.flatnonzero((data.price == 0) & (True if data.weight is None else data.weight > 0))
    if not len(zero):
        return ""
    series = len(np.unique(np.searchsorted(data.offsets, zero, side="right")))
    rows = f"{len(zero):,} rows in {series:,} series have" if len(zero) > 1 else "1 row has"
    at = "" if data.line is None else f"line {int(data.line[zero].min())}"
    first = f" ({'the first at ' if len(zero) > 1 else ''}{at})" if at else ""
    return (f"{path}, column {column!r}: {rows} a price of 0{first}: kept, but often a missing price written as 0; "
            "a log-log curve needs prices above zero and is unavailable there")


def unplanned_line(results, plan_file: Path) -> str:
    """A warning when the plan file gives no price for some series: they get no plan volume, interval or
    outside-range check, which a partial plan file would otherwise leave unsaid; the first such series named."""
    import numpy as np
    missing = np.flatnonzero(~np.isfinite(results.plan_price))
    if not len(missing):
        return ""
    from fitcore.text import clean
    first = " · ".join(clean(str(value)) for value in results.data.key_of(int(missing[0])).values())
    other = (f"the other {len(missing):,} (the first: {first}) have" if len(missing) > 1
             else f"the other ({first}) has")
    return (f"{clean(str(plan_file))}: prices {results.n_series - len(missing):,} of {results.n_series:,} series; "
            f"{other} no plan price (no plan volume or interval, and no check of a plan price against the prices seen)")


def first_words(rejects, columns) -> str:
    """', the first at line 5, column 'price': non-numeric price: '2,08' (a decimal comma? …)'."""
    from fitcore.data.loader import first_rejected
    column, said = first_rejected(rejects, columns)
    return f", the first at line {int(rejects.lines[0])}" + (f", column {column!r}" if column else "") + f": {said}"


def summary(results, diagnosis):
    """The closing line's counts, taken now; the line itself given the seconds and the results' name
    (so the fit need not be kept until the end)."""
    import numpy as np
    names = results.names
    tally = np.bincount(np.asarray(results.chosen) + 1, minlength=len(names) + 1).tolist()  # "none" (-1) first
    counts = (results.n_series, results.data.n_rows, dict(zip([*names, "none"], [*tally[1:], tally[0]])),
              diagnosis.counts(), int((~diagnosis.raised.any(axis=1)).sum()))
    return lambda seconds, output: summary_line(*counts, f"in {seconds:.2f} s", str(output))
