"""``pricefold fit --engine dask``: the results as a folder of Parquet parts with ``_summary.json``."""
from __future__ import annotations

import sys
import time
from pathlib import Path

from .cli import columns_from, report_rejects, summary_line


def run_fit_dask(args, settings, thresholds) -> int:
    import numpy as np

    from fitcore.data.loader import Rejects, file_kind
    from fitcore.errors import SettingsError
    from fitcore.scale.dask_engine import connect, disconnect, fit_on_dask

    from .progress import ProgressLine

    if args.output.suffix.lower() == ".json" or args.output.is_file():
        raise SettingsError(f"--engine dask writes a folder of Parquet parts: give -o a folder name, "
                            f"not {args.output.name!r}")
    if args.workers < 1 or (args.partitions is not None and args.partitions < 1):
        raise SettingsError("expected --workers and --partitions of at least 1")
    book = None
    if getattr(args, "ledger", None) is not None:  # read (and verified) once here; each partition gets its series
        from fitcore import ledger

        from .cycle_cli import same_file
        from .ledger_cli import open_ledger
        if same_file(args.output, args.ledger):
            raise ledger.LedgerError(f"{args.output}: is the ledger; choose another results name")
        book = open_ledger(args.ledger, refuse=(ledger.BROKEN,))
    started = time.perf_counter()
    client = connect(args.scheduler, args.workers)
    bar = ProgressLine("fitting partitions", enabled=None if not args.quiet else False)
    try:
        total = fit_on_dask(args.data, columns_from(args), settings, thresholds, args.output, plan_file=args.plan,
                            plan_price=args.plan_price, sep=args.sep, client=client, partitions=args.partitions,
                            progress=bar, ledger=book)
    finally:
        bar.close()
        disconnect(client)
    rejected = total["rejected"]
    kind = "parquet" if args.data.is_dir() else file_kind(args.data)[0]
    delimiter = None if kind == "parquet" or not rejected["lines"] else args.sep or _delimiter_of(args.data)
    report_rejects(Rejects(args.data, kind, delimiter, np.array(rejected["lines"], dtype=np.int64),
                           rejected["reasons"]), args.output / "rejects.csv", strict=args.strict, quiet=args.quiet)
    if args.plan and total["plan_matched"] < _plan_rows(args.plan):
        print(f"warning: {args.plan} names series that are not in the data", file=sys.stderr)
    if not args.quiet:
        from fitcore.fit.families import candidates_for
        from fitcore.review.flags import CODES
        chosen = {c.name: total["chosen"].get(c.name, 0) for c in candidates_for(settings)} | {"none": total["none"]}
        flags = {code: total["flags"][code] for code in CODES if code in total["flags"]}
        print(summary_line(total["series"], total["rows"], chosen, flags, total["clean"],
                           f"on {total['workers']} Dask workers in {time.perf_counter() - started:.2f} s",
                           f"{args.output}/ ({total['partitions']} parts)"), file=sys.stderr)
        if book is not None:
            tested = sum(total["backtest"].values())
            parts = " · ".join(f"{name} {count:,}" for name, count in sorted(total["backtest"].items()))
            print(f"ledger: {tested:,} signed series on changed data" + (f" — backtest {parts}; shifted "
                  f"{total['shifted']:,}" if tested else ""), file=sys.stderr)
    return 0


def _delimiter_of(path: Path) -> str:
    from fitcore.data.loader import _sniff, file_kind
    return file_kind(path)[1] or _sniff(path)


def _plan_rows(path: Path) -> int:
    with open(path, encoding="utf-8", errors="replace") as handle:
        return max(sum(1 for line in handle if line.strip()) - 1, 0)
