"""``pricefold fit --engine dask``: the results as a folder of Parquet parts with ``_summary.json`` (and
``rejects.csv`` when rows were rejected), built beside the target and swapped in whole."""
from __future__ import annotations

import sys
import time
from pathlib import Path

from .summary import rejects_line, summary_line

WORKERS = 2  # a local Dask cluster's worker processes unless --workers says


def run_fit_dask(args, run) -> int:
    from fitcore.errors import SettingsError
    from fitcore.outputs import check_outputs
    from fitcore.scale.dask_engine import REJECTS, connect, disconnect, fit_on_dask

    from .progress import ProgressLine

    if args.output.suffix.lower() == ".json" or args.output.is_file():
        raise SettingsError(f"--engine dask writes a folder of Parquet parts: give -o a folder name, "
                            f"not {args.output.name!r}")
    workers = WORKERS if args.workers is None else args.workers
    if workers < 1 or (args.partitions is not None and args.partitions < 1):
        raise SettingsError("expected --workers and --partitions of at least 1")
    check_outputs([(args.output, "results-folder")], [("the data", args.data), *run.inputs])
    book = None
    if getattr(args, "ledger", None) is not None:  # read (and verified) once here; each partition gets its series
        from fitcore import ledger
        from fitcore.ledger.elsewhere import same_file

        from .fit_ledger import FIT_READS, must_exist
        from .ledger_cli import open_ledger
        must_exist(args.ledger, FIT_READS)
        if same_file(args.output, args.ledger):
            raise ledger.LedgerError(f"{args.output}: is the ledger; choose another results name")
        book = open_ledger(args.ledger, refuse=(ledger.BROKEN,))
    started = time.perf_counter()
    client = connect(args.scheduler, workers)
    bar = ProgressLine("fitting partitions", enabled=None if not args.quiet else False)
    try:
        total = fit_on_dask(args.data, run.columns, run.settings, run.thresholds, args.output,
                            plan_file=run.plan_file, plan_price=run.plan_price, sep=run.sep, client=client,
                            partitions=args.partitions, progress=bar, strict=args.strict, ledger=book)
    finally:
        bar.close()
        disconnect(client)
    if run.plan_file and total["plan_matched"] < _plan_rows(run.plan_file):
        print(f"warning: {run.plan_file} names series that are not in the data", file=sys.stderr)
    from fitcore.data.loader import column_names, unread_columns, unread_columns_note
    unread = unread_columns(column_names(args.data, run.sep, run.columns.needed), run.columns)
    note = unread_columns_note(args.data, unread, run.columns)
    if note:
        print(note, file=sys.stderr)
    if run.plan_file:
        from fitcore.data.plan import unused_columns_note
        unused = unused_columns_note(run.plan_file, tuple(run.columns.keys), tuple(run.columns.controls),
                                     bool(run.settings.season))
        if unused:
            print(unused, file=sys.stderr)
    if total["rejected"]["lines"]:  # a warning, not progress: --quiet keeps it
        print(rejects_line(total["rejected"]["reasons"], args.output / REJECTS,
                           total["rows"] + len(total["rejected"]["lines"])), file=sys.stderr)
    missed = book is not None and _none_backtested(args, book)
    if args.quiet:
        return 0
    from fitcore.fit.families import candidates_for
    from fitcore.review.flags import CODES
    chosen = {c.name: total["chosen"].get(c.name, 0) for c in candidates_for(run.settings)} | {"none": total["none"]}
    flags = {code: total["flags"][code] for code in CODES if code in total["flags"]}
    print(summary_line(total["series"], total["rows"], chosen, flags, total["clean"],
                       f"on {total['workers']} Dask worker{'s' * (total['workers'] != 1)} in {time.perf_counter() - started:.2f} s",
                       f"{args.output}/ ({total['partitions']} parts)"), file=sys.stderr)
    if missed:
        print(f"ledger: none of its series is in these results (head {book.head_text[:20]}…)", file=sys.stderr)
    elif book is not None:
        tested = sum(total["backtest"].values())
        parts = " · ".join(f"{name} {count:,}" for name, count in sorted(total["backtest"].items()))
        print(f"ledger: {tested:,} signed series on changed data" + (f" — backtest {parts}; shifted "
              f"{total['shifted']:,}" if tested else ""), file=sys.stderr)
    return 0


def _none_backtested(args, book) -> bool:
    """Whether the results written share not one series with the ledger (key columns of their own, or the same
    ones with other values: ``fitcore.ledger.key_columns``), said in a warning line as the local fit says it."""
    from fitcore.results.read import read_header
    from fitcore.results.series_columns import results_keys

    from .ledger_cli import key_mismatch, meets, say_missing
    said = key_mismatch(read_header(args.output), book, args.ledger)
    if said is not None:
        print(f"pricefold fit: warning: {said}; nothing was backtested", file=sys.stderr)
        return True
    keys = list(results_keys(args.output))
    said, found = meets(keys, book, args.ledger)
    some = said is not None and found.new < len(keys)  # some series shared: those spelled otherwise were not tested
    if said:
        tail = "those were not backtested" if some else "nothing was backtested"
        print(f"pricefold fit: warning: {said}; {tail}", file=sys.stderr)
    say_missing("pricefold fit", None, keys, book, args.ledger)  # as the local fit, after its warnings
    return said is not None and not some


def _plan_rows(path: Path) -> int:
    with open(path, encoding="utf-8", errors="replace") as handle:
        return max(sum(1 for line in handle if line.strip()) - 1, 0)
