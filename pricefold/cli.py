"""``pricefold``: fit demand curves for every series and choose one each by cross-validation.

Each subcommand is a function ``run_<name>(args)`` returning an exit status.
Errors pricefold anticipates (``PricefoldError``) print as one line on stderr
and exit 2; nothing is left half-written.
"""
from __future__ import annotations

import argparse
import sys
import time
from collections import Counter
from pathlib import Path

CAUTION = ("Curves fitted to observational sales data confound price with promotions, seasons and "
           "stock-outs; predictions outside the observed price range are extrapolations. "
           "pricefold proposes; the analyst decides.")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="pricefold", description="Fit and cross-validate a demand curve for every price–volume series.",
        epilog=CAUTION)
    commands = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    fit = commands.add_parser("fit", help="fit every series of a data file and write a results file",
                              description="Fit every candidate curve to every series, cross-validate, "
                                          "choose one per series and predict at the plan price.",
                              epilog=CAUTION)
    fit.add_argument("data", type=Path, metavar="DATA", help="CSV/TSV (optionally .gz) or Parquet file or folder")
    fit.add_argument("-o", "--output", type=Path, required=True, metavar="OUT",
                     help="results file: .json (small runs) or .parquet (large ones)")
    add_column_options(fit)
    add_fit_options(fit)
    fit.add_argument("--threshold", action="append", default=[], metavar="NAME=VALUE",
                     help="override a flag threshold, e.g. min_points=8 (repeatable)")
    fit.add_argument("--strict", action="store_true",
                     help="fail (exit 2) if any row is rejected, instead of fitting the usable rows")
    fit.add_argument("--quiet", action="store_true", help="no progress bar and no summary line")
    from .cycle_cli import add_fit_ledger_option
    add_fit_ledger_option(fit)
    scale = fit.add_argument_group("engine")
    scale.add_argument("--engine", choices=("local", "dask"), default="local",
                       help="local (default): this process; dask: a Dask cluster, results as a folder of parts")
    scale.add_argument("--scheduler", default=None, metavar="ADDRESS",
                       help="with --engine dask: an existing cluster's scheduler (default: start a local one)")
    scale.add_argument("--workers", type=int, default=2, metavar="N",
                       help="with --engine dask and no scheduler: worker processes to start (default: 2)")
    scale.add_argument("--partitions", type=int, default=None, metavar="P",
                       help="with --engine dask: partitions of the series (default: 4 per worker)")

    show = commands.add_parser("show", help="print a results file as text: one series, or a filtered list",
                               description="Print one series in full (candidates, choice, flags, plan) or, when "
                                           "several match, a list ordered by need of attention.", epilog=CAUTION)
    show.add_argument("results", type=Path, metavar="RESULTS", help="a .json or .parquet results file")
    show.add_argument("--product", action="append", default=[], metavar="P", help="only this product (repeatable)")
    show.add_argument("--key", action="append", default=[], metavar="COL=VALUE",
                      help="only series whose key column COL is VALUE, e.g. region=North (repeatable)")
    show.add_argument("--flag", metavar="CODE", help="only series carrying this flag")
    show.add_argument("--ledger", type=Path, default=None, metavar="LEDGER",
                      help="also each series' status in this ledger and what it needs (results from fit --ledger "
                           "hold the backtest of signed curves)")

    triage = commands.add_parser("triage", help="the keyboard-driven triage screen",
                                 description="Work through the series that need a human and sign off decisions. "
                                             "Given a data file, it fits first; given a results file, it refits "
                                             "the data that file names, the same way.", epilog=CAUTION)
    triage.add_argument("source", type=Path, metavar="RESULTS_OR_DATA")
    add_session_options(triage)
    add_column_options(triage)
    add_fit_options(triage)
    triage.add_argument("--threshold", action="append", default=[], metavar="NAME=VALUE",
                        help="override a flag threshold (repeatable)")

    demo = commands.add_parser("demo", help="the whole job on the bundled invented sample, ending in triage",
                               description="Fit the bundled sample scenario (an invented wholesaler), write "
                                           "results and a ledger under DIR, and open the triage screen.",
                               epilog=CAUTION)
    demo.add_argument("--dir", type=Path, default=Path("pricefold-demo"), metavar="DIR",
                      help="where to write results.json and ledger.jsonl (default: ./pricefold-demo)")
    demo.add_argument("--analyst", default=None, metavar="NAME", help="display name (default: the OS user)")

    from .cycle_cli import add_carry_parser
    from .ledger_cli import add_parser as add_ledger_parser
    add_carry_parser(add_ledger_parser(commands))
    from .report.command import add_parser as add_report_parser
    add_report_parser(commands)
    return parser


def add_session_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--ledger", type=Path, default=None, metavar="FILE",
                        help="the sign-off ledger (default: <results or data name>.ledger.jsonl beside it)")
    parser.add_argument("--analyst", default=None, metavar="NAME", help="display name (default: the OS user)")


def add_column_options(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("columns")
    group.add_argument("--product", default=None, metavar="COL", help="product column (default: product)")
    group.add_argument("--segment", action="append", default=None, metavar="COL",
                       help="a column that splits a product into series (repeatable), e.g. region")
    group.add_argument("--price", default=None, metavar="COL", help="price column (default: price)")
    group.add_argument("--volume", default=None, metavar="COL", help="volume column (default: volume)")
    group.add_argument("--date", default=None, metavar="COL",
                       help="date column, ISO dates (needed by --fold-order time; repeats of a series and date are rejected)")
    group.add_argument("--weight", default=None, metavar="COL",
                       help="observation weights ≥ 0: weighted least squares throughout")
    group.add_argument("--sep", default=None, metavar="CHAR", help="field separator (default: from the file)")


def add_fit_options(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("fitting")
    group.add_argument("--config", type=Path, default=None, metavar="FILE",
                       help="settings file (default: pricefold.toml in the current folder, if there is one)")
    group.add_argument("--degrees", default=None, metavar="A-B", help="polynomial degrees to try (default: 0-5)")
    group.add_argument("--no-loglog", dest="loglog", action="store_const", const=False, default=None,
                       help="leave out the constant-elasticity curve ln volume = a + e·ln price")
    group.add_argument("--semilog", action="store_const", const=True, default=None,
                       help="add the constant semi-elasticity curve ln volume = a + b·price")
    group.add_argument("--folds", default=None, metavar="K|loo", help="number of folds, or loo (default: 5)")
    group.add_argument("--fold-order", default=None, choices=("shuffled", "given", "time"),
                       help="deal rows into folds shuffled (seeded), in file order, or by date (default: shuffled)")
    group.add_argument("--seed", type=int, default=None, help="seed of the fold shuffle (default: 0)")
    group.add_argument("--rule", default=None, choices=("one-se", "lowest"),
                       help="one-se: simplest within one standard error of the best; lowest: lowest CV error")
    plan = group.add_mutually_exclusive_group()
    plan.add_argument("--plan-price", type=float, default=None, metavar="P", help="one plan price for every series")
    plan.add_argument("--plan", type=Path, default=None, metavar="FILE",
                      help="plan prices per series: the key columns and plan_price")


def resolve(args) -> None:
    """Fill every option not given on the command line from the settings file, then the defaults."""
    from fitcore.data.config import load_config, pick
    config = load_config(args.config)
    for option, table, key, default in (
            ("product", "columns", "product", "product"), ("segment", "columns", "segments", []),
            ("price", "columns", "price", "price"), ("volume", "columns", "volume", "volume"),
            ("date", "columns", "date", None), ("weight", "columns", "weight", None), ("sep", "columns", "sep", None),
            ("degrees", "fit", "degrees", "0-5"), ("loglog", "fit", "loglog", True),
            ("semilog", "fit", "semilog", False), ("folds", "fit", "folds", "5"),
            ("fold_order", "fit", "fold_order", "shuffled"), ("seed", "fit", "seed", 0), ("rule", "fit", "rule", "one-se")):
        setattr(args, option, pick(getattr(args, option), config, table, key, default))
    if args.plan is None and args.plan_price is None:
        args.plan_price = config.get("fit", {}).get("plan_price")
        plan = config.get("fit", {}).get("plan")
        args.plan = Path(plan) if plan else None
    if isinstance(args.degrees, list):
        args.degrees = ",".join(str(d) for d in args.degrees)
    args.folds = str(args.folds)
    file_thresholds = [f"{k}={v}" for k, v in config.get("thresholds", {}).items()]
    args.threshold = file_thresholds + list(getattr(args, "threshold", []) or [])
    args.config_path = config.get("_path")


def columns_from(args):
    from fitcore.data.loader import Columns
    return Columns(product=args.product, segments=tuple(args.segment), price=args.price, volume=args.volume,
                   date=args.date, weight=args.weight)


def settings_from(args):
    from fitcore.fit.settings import FitSettings, parse_degrees, parse_folds, provenance
    extra = provenance(columns_from(args).as_dict(), str(args.plan.resolve()) if args.plan else None, args.plan_price)
    if args.config_path:
        extra["config"] = args.config_path
    return FitSettings(degrees=parse_degrees(str(args.degrees)), loglog=bool(args.loglog),
                       semilog=bool(args.semilog), folds=parse_folds(args.folds), fold_order=args.fold_order,
                       seed=int(args.seed), rule=args.rule, extra=extra)


def run_fit(args) -> int:
    from fitcore import fit_batch
    from fitcore.data.loader import load_with_rejects
    from fitcore.data.plan import plan_prices
    from fitcore.errors import SettingsError
    from fitcore.results.write import write_results
    from fitcore.review.flags import diagnose
    from fitcore.review.thresholds import Thresholds, parse_threshold_options

    from .progress import ProgressLine

    resolve(args)
    settings = settings_from(args)
    thresholds = Thresholds().with_overrides(parse_threshold_options(args.threshold))
    if settings.fold_order == "time" and not args.date:
        raise SettingsError("--fold-order time needs the date column: add --date COLUMN")
    if args.plan_price is not None and not args.plan_price > 0:
        raise SettingsError(f"expected --plan-price above zero, got {args.plan_price}")
    if args.engine == "dask":
        from .fit_dask import run_fit_dask
        return run_fit_dask(args, settings, thresholds)
    started = time.perf_counter()
    ahead = None
    if args.ledger is not None:  # read and verified beside the load and the fit
        from .cycle_cli import LedgerAhead
        ahead = LedgerAhead(args.ledger, [args.output])
    data, rejects = load_with_rejects(args.data, columns_from(args), sep=args.sep)
    report_rejects(rejects, rejects_path(args.output), strict=args.strict, quiet=args.quiet)
    plan = plan_prices(data, args.plan, args.sep) if args.plan else args.plan_price
    bar = ProgressLine("fitting", enabled=None if not args.quiet else False)
    try:
        results = fit_batch(data, settings, plan_price=plan, progress=bar)
    finally:
        bar.close()
    diagnosis = diagnose(results, thresholds)
    backtest = None
    if ahead is not None:  # the signed curves against the rows since, and the shifted flag
        from .cycle_cli import backtest_against, backtest_line
        diagnosis, backtest = backtest_against(ahead, results, diagnosis, thresholds)
    write_results(results, args.output, diagnosis, backtest=backtest)
    if not args.quiet:
        print(summary(results, diagnosis, time.perf_counter() - started, args.output), file=sys.stderr)
        if backtest is not None:
            print(backtest_line(backtest), file=sys.stderr)
    return 0


def rejects_path(output: Path) -> Path:
    return output.with_name(output.name.split(".")[0] + ".rejects.csv")


def report_rejects(rejects, target: Path, *, strict: bool, quiet: bool) -> None:
    """Write the rejected rows to ``target`` and say so in one line; with ``strict``, fail."""
    from fitcore.data.loader import write_rejects
    from fitcore.data.validation import summary as rejects_summary
    from fitcore.errors import DataError

    if not len(rejects):
        target.unlink(missing_ok=True)  # an older run's rejects would now mislead
        return
    write_rejects(rejects, target)
    if strict:
        raise DataError(f"{rejects.reasons[0]} ({rejects_summary(rejects.reasons)}; --strict; see {target})",
                        path=str(rejects.path), line=int(rejects.lines[0]))
    if not quiet:
        print(f"{rejects_summary(rejects.reasons)} — see {target}", file=sys.stderr)


def summary(results, diagnosis, seconds: float, output: Path) -> str:
    names = results.names
    chosen = Counter(names[c] if c >= 0 else "none" for c in results.chosen.tolist())
    return summary_line(results.n_series, results.data.n_rows, {name: chosen[name] for name in [*names, "none"]},
                        diagnosis.counts(), int((~diagnosis.raised.any(axis=1)).sum()), f"in {seconds:.2f} s",
                        str(output))


def summary_line(n_series: int, n_rows: int, chosen: dict, flags: dict, clean: int, how: str, where: str) -> str:
    """'fitted 180 series (18,625 rows) in 0.41 s; chosen: …\nflags: …; 159 series (88%) carry none → OUT'."""
    parts = " · ".join(f"{name} {count:,}" for name, count in chosen.items() if count)
    flagged = " · ".join(f"{code} {count:,}" for code, count in flags.items()) or "none"
    share = clean / n_series if n_series else 1.0
    return (f"fitted {n_series:,} series ({n_rows:,} rows) {how}; chosen: {parts}\n"
            f"flags: {flagged}; {clean:,} series ({share:.0%}) carry none → {where}")


def run_show(args) -> int:
    from fitcore.errors import SettingsError
    from fitcore.results.read import results_in_parts

    from .show import detail, select, table
    keys = {}
    for item in args.key:
        name, sep, value = item.partition("=")
        if not sep:
            raise SettingsError(f"expected --key COL=VALUE, got {item!r}")
        keys[name] = value
    header, parts = results_in_parts(args.results, args.product, keys)  # filtered as read: big folders stay cheap
    picked = [record for series in parts for record in select(series, args.product, keys, args.flag)]
    if not picked:
        print(f"pricefold show: no series in {args.results} matches", file=sys.stderr)
        return 1
    if args.ledger is not None:
        from .cycle_cli import show_with_ledger
        print(show_with_ledger(picked, args.ledger))
    else:
        print(detail(picked[0]) if len(picked) == 1 else table(picked))
    if len(picked) == 1 and picked[0].get("plan"):
        print(f"\n{CAUTION}")
    return 0


def is_results(path: Path) -> bool:
    from fitcore.results.read import result_parts
    if result_parts(path) is not None:
        return True
    if path.suffix.lower() == ".json":
        return True
    if path.suffix.lower() in (".parquet", ".pq") and path.is_file():
        import pyarrow.parquet as pq
        try:
            return b"pricefold" in (pq.read_schema(path).metadata or {})
        except Exception:  # not a readable Parquet file: the loader will say so
            return False
    return False


def run_triage(args) -> int:
    from fitcore.data.config import load_config
    from fitcore.review.thresholds import Thresholds, parse_threshold_options
    from tui.factory import Source, default_ledger, is_stored, source_from_results
    ledger_path = args.ledger or default_ledger(args.source)
    units = load_config(args.config).get("units", {})
    if is_stored(args.source):  # Parquet results: open them as they are, read the observations behind the screen
        source = source_from_results(args.source, check_data=False)
        source.units = units
        return open_triage(source, ledger_path, args.analyst, stored=args.source)
    if is_results(args.source):
        source = source_from_results(args.source)
    else:
        resolve(args)
        if not args.source.exists():
            from fitcore.errors import DataError
            raise DataError("file not found", path=str(args.source))
        source = Source(data=args.source, columns=columns_from(args), settings=settings_from(args),
                        plan_file=args.plan, plan_price=args.plan_price,
                        thresholds=Thresholds().with_overrides(parse_threshold_options(args.threshold)))
    source.units = units
    return open_triage(source, ledger_path, args.analyst)


# Above this many input rows, triage on stored results does not refit the data for the observations
# (the local engine needs ~150 bytes a row).
REFIT_ROWS = 50_000_000


def open_triage(source, ledger_path: Path, analyst: str | None, stored: Path | None = None) -> int:
    """The triage app on a fit of ``source``, or on the ``stored`` results file (then fit behind the screen)."""
    from fitcore.results.read import read_header
    from tui.app import TriageApp
    from tui.factory import open_session, open_stored_session, refit_stored

    from .ledger_cli import identity, ledger_key
    who, key = identity(analyst), ledger_key()
    if stored is not None:
        rows = read_header(stored).get("input", {}).get("rows") or 0
        observer = (lambda progress: refit_stored(source, progress)) if rows <= REFIT_ROWS else None

        def opener(progress):
            session = open_stored_session(stored, ledger_path, who, key, progress, units=source.units)
            if observer is None:
                session.warnings.append(f"The data behind these results have {rows:,} rows, too many to read here: "
                                        "the evidence shows the fitted curves without the observations.")
            return session
        app = TriageApp(opener, observer=observer)
    else:
        app = TriageApp(lambda progress: open_session(source, ledger_path, who, key, progress))
    app.run()
    print(f"decisions are in {ledger_path}", file=sys.stderr)
    return app.return_code or 0


def run_demo(args) -> int:
    from fitcore.data.config import load_config
    from fitcore.results.write import write_results
    from tui.factory import fit_source, sample_source, source_from_results

    folder = args.dir
    folder.mkdir(parents=True, exist_ok=True)
    print("fitting the invented sample …\n(the first run after an install also compiles the engine: ~10 s, once)",
          file=sys.stderr)
    results, diagnosis = fit_source(sample_source())
    results_path = folder / "results.json"
    write_results(results, results_path, diagnosis)
    print(f"fitted the invented sample: {results.n_series} series → {results_path}", file=sys.stderr)
    print(f"report: pricefold report {results_path} --ledger {folder}/ledger.jsonl -o {folder}/report.html", file=sys.stderr)
    source = source_from_results(results_path)
    source.units = load_config(None).get("units", {})
    return open_triage(source, folder / "ledger.jsonl", args.analyst)


def run_ledger(args) -> int:
    if args.ledger_command == "carry":
        from .cycle_cli import run_carry
        return run_carry(args)
    from .ledger_cli import run
    return run(args)


def run_report(args) -> int:
    from .report.command import run
    return run(args)


COMMANDS = {"fit": run_fit, "show": run_show, "ledger": run_ledger, "triage": run_triage, "demo": run_demo,
            "report": run_report}


def main(argv: list[str] | None = None) -> int:
    from fitcore.errors import PricefoldError
    args = build_parser().parse_args(argv)
    try:
        return COMMANDS[args.command](args)
    except PricefoldError as exc:
        print(f"pricefold {args.command}: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"pricefold {args.command}: interrupted; nothing was written", file=sys.stderr)
        return 130
    except BrokenPipeError:  # the reader went away (``| head``): stop quietly, as other tools do
        import os
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0
