"""``pricefold``: fit demand curves for every series and choose one each by cross-validation.

Each subcommand is a function ``run_<name>(args)`` returning an exit status.
Errors pricefold anticipates (``PricefoldError``) print as one line on stderr
and exit 2; nothing is left half-written.
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

from fitcore.collector import collector_paused

CAUTION = ("Curves fitted to observational sales data confound price with promotions, seasons and "
           "stock-outs; predictions outside the observed price range are extrapolations. "
           "pricefold proposes; the analyst decides.")


# The system failed an input or output (a full disk under stdout): sysexits' EX_IOERR, apart from 1 (a ledger
# not intact, for 'ledger verify') and 2 (bad input).
IO_FAILED = 74


class OneLineParser(argparse.ArgumentParser):
    """argparse, with a usage mistake reported as one line (the usage is one ``--help`` away)."""

    def error(self, message: str):
        self.exit(2, f"{self.prog}: {message} (see {self.prog} --help)\n")

    def parse_args(self, args=None, namespace=None):
        """As argparse's, but arguments no command takes are said by the (sub)command given them, pointing at
        its own ``--help`` (argparse said them as the top command's: ``see pricefold --help``)."""
        parsed, extra = self.parse_known_args(args, namespace)
        if extra:
            self.chosen(parsed).error(f"unrecognized arguments: {' '.join(extra)}")
        return parsed

    def chosen(self, parsed) -> argparse.ArgumentParser:
        """The innermost subcommand's parser ``parsed`` went to (``ledger carry``'s), else this one."""
        for action in self._actions:
            if isinstance(action, argparse._SubParsersAction) and getattr(parsed, action.dest, None) in action.choices:
                sub = action.choices[getattr(parsed, action.dest)]
                return sub.chosen(parsed) if isinstance(sub, OneLineParser) else sub
        return self


def build_parser() -> argparse.ArgumentParser:
    from .options import OneOutput, add_column_options, add_fit_options
    parser = OneLineParser(
        prog="pricefold", description="Fit and cross-validate a demand curve for every price–volume series.",
        epilog=CAUTION)
    parser.add_argument("--version", action="version", version=f"%(prog)s {version()}")
    commands = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    fit = commands.add_parser("fit", help="fit every series of a data file and write a results file",
                              description="Fit every candidate curve to every series, cross-validate, "
                                          "choose one per series and predict at the plan price.",
                              epilog=CAUTION)
    fit.add_argument("data", type=Path, metavar="DATA", help="CSV/TSV (optionally .gz) or Parquet file or folder")
    fit.add_argument("-o", "--output", action=OneOutput, required=True, metavar="OUT",
                     help="results file: .json (small runs) or .parquet (large ones); its folder must exist")
    add_column_options(fit)
    add_fit_options(fit)
    fit.add_argument("--strict", action="store_true",
                     help="fail (exit 2, nothing written) if any row is rejected, instead of fitting the usable rows")
    fit.add_argument("-q", "--quiet", action="store_true", help="no progress bar and no summary line")
    from .ledger_options import add_carry_parser, add_fit_ledger_option, add_ledger_parser
    add_fit_ledger_option(fit)
    scale = fit.add_argument_group("engine")
    scale.add_argument("--engine", choices=("local", "dask"), default="local",
                       help="local (default): this process; dask: a Dask cluster, results as a folder of parts")
    scale.add_argument("--scheduler", default=None, metavar="ADDRESS",
                       help="with --engine dask: an existing cluster's scheduler (default: start a local one)")
    from .fit_dask import WORKERS
    scale.add_argument("--workers", type=int, default=None, metavar="N",
                       help=f"with --engine dask and no scheduler: worker processes to start (default: {WORKERS})")
    scale.add_argument("--partitions", type=int, default=None, metavar="P",
                       help="with --engine dask: partitions of the series (default: 4 per worker)")

    show = commands.add_parser("show", help="print a results file as text: one series, or a filtered list",
                               description="Print one series in full (candidates, choice, flags, plan) or, when "
                                           "several match, a list ordered by need of attention.", epilog=CAUTION)
    show.add_argument("results", type=Path, metavar="RESULTS", help="a .json or .parquet results file")
    show.add_argument("--product", action="append", default=[], metavar="P",
                      help="only this product (repeatable; either Unicode normal form of it, or as shown)")
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

    demo = commands.add_parser("demo", help="the whole job on the bundled invented sample, ending in triage",
                               description="Fit the bundled sample scenario (an invented wholesaler), write "
                                           "results and a ledger under DIR, and open the triage screen.",
                               epilog=CAUTION)
    demo.add_argument("--dir", type=Path, default=Path("pricefold-demo"), metavar="DIR",
                      help="where to write the results and ledger.jsonl (default: ./pricefold-demo)")
    demo.add_argument("--analyst", default=None, metavar="NAME", help="display name (default: the OS user)")
    demo.add_argument("--control", action="append", default=[], metavar="COL",
                      help="hold a column of the sample fixed while fitting: promo (the promotion weeks)")
    demo.add_argument("--season", type=int, default=0, choices=range(5), metavar="K",
                      help="hold K sine/cosine pairs of the season fixed, 0 to 4 (default: 0)")

    add_carry_parser(add_ledger_parser(commands))
    from .report.command import add_parser as add_report_parser
    add_report_parser(commands)
    return parser


def version() -> str:
    """The installed package's version, from its metadata (a checkout run without installing has none)."""
    from importlib.metadata import PackageNotFoundError
    from importlib.metadata import version as installed
    try:
        return installed("pricefold")
    except PackageNotFoundError:
        return "unknown (not installed)"


def add_session_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--ledger", type=Path, default=None, metavar="FILE",
                        help="the sign-off ledger (default: <results or data name>.ledger.jsonl beside it; not "
                             "for results fitted against another ledger: give that one, or name the default)")
    parser.add_argument("--analyst", default=None, metavar="NAME", help="display name (default: the OS user)")


def stopping_cleanly(command):
    """``command`` with Ctrl+C, a ``kill`` (SIGTERM) and a closed SSH session (SIGHUP) each ending it in one line
    and exit 128 + the signal's number, saying what stands (``interrupts``): before, SIGTERM and SIGHUP ended
    the ledger commands and the report at once and in silence.  A signal after the command's records or file
    were in place is said once it has ended."""
    def run(args) -> int:
        from .interrupts import check, noticed
        with noticed():
            code = command(args)
            check()
            return code
    return run


def run_fit(args) -> int:
    from .fit_run import run_fit as fit
    dask_only = [flag for flag in ("--scheduler", "--workers", "--partitions")
                 if getattr(args, flag[2:]) is not None]
    if dask_only and args.engine != "dask":  # else quietly unused: this machine's engine has no workers
        from fitcore.errors import SettingsError
        raise SettingsError(f"{dask_only[0]} is an option of --engine dask; add --engine dask, or leave it out to "
                            "fit on this machine")
    if getattr(args, "engine", None) == "dask":  # a cluster's long-lived client: the collector as it is
        return fit(args)
    with collector_paused():  # the numbers' work makes few cycles: 7M rows left ≈ 450 unreachable objects
        return fit(args)


@stopping_cleanly
def run_show(args) -> int:
    from fitcore.errors import SettingsError
    keys = {}
    for item in args.key:
        name, sep, value = item.partition("=")
        if not sep:
            raise SettingsError(f"expected --key COL=VALUE, got {item!r}")
        keys[name] = value  # made an EitherForm by _show, as --product's texts
    from fitcore.review.flags import CODES
    if args.flag is not None and args.flag not in CODES:
        raise SettingsError(f"expected --flag to be one of {', '.join(CODES)}; got {args.flag!r}")
    with collector_paused():  # a record a series and no cycles among them: at 100k, collections were half the time
        return _show(args, keys)


def _show(args, keys: dict) -> int:
    from fitcore.results.series_columns import is_columnar, listed_series

    from fitcore.text import EitherForm

    from .show import detail, one_label, select, table
    from functools import cache

    from fitcore.results.series_columns import results_keys
    products = EitherForm(args.product)  # either Unicode form, or as shown, as ledger show and the screen's search
    typed, keys = keys, {name: EitherForm([value]) for name, value in keys.items()}
    every = cache(lambda: list(results_keys(args.results)))  # every series' key, read once if a hint or note needs it
    # with --ledger, --flag picks by the flags shown: an override's are its own curve's (``show_with_ledger``)
    flag = None if args.ledger is not None else args.flag
    full = None
    if is_columnar(args.results):  # column by column, a record only for one series shown in full
        header, listed = listed_series(args.results, products, keys, flag)
        picked = [listed.record(0)] if len(listed) == 1 else listed.records
        full = listed.record  # an override's candidates, for its own flags
    else:
        from fitcore.results.read import results_in_parts
        header, parts = results_in_parts(args.results, products, keys)  # filtered as read
        picked = [record for series in parts for record in select(series, products, keys, flag)]
    if not picked:
        columns = header.get("settings", {}).get("columns") or {}
        names = [columns["product"], *columns.get("segments", [])] if columns.get("product") else []
        unknown = [name for name in keys if names and name not in names]
        if unknown:
            from fitcore.errors import SettingsError
            raise SettingsError(f"these results have no key column {unknown[0]!r}; their key columns: "
                                f"{', '.join(names)}")
        from .show import filter_near_miss
        print(f"pricefold show: no series in {args.results} matches{filter_near_miss(every, args.product, products, typed)}",
              file=sys.stderr)
        if args.ledger is not None and not args.flag:  # a signed series renamed away matches no row: say where it went
            from .cycle_cli import show_missing
            show_missing(args.results, header, args.ledger, lambda key: within(key, header, products, keys))
        return 1
    binary = (header.get("settings", {}).get("controls") or {}).get("binary", [])
    weight = (header.get("settings", {}).get("columns") or {}).get("weight")
    first = (lambda record: products.rank(next(iter(record["key"].values())))) if products else None  # as typed first
    if args.ledger is not None:
        from .cycle_cli import show_with_ledger
        shown = show_with_ledger(picked, args.ledger, binary, header, args.results,
                                 whole=not (args.product or keys or args.flag),
                                 within=None if args.flag else lambda key: within(key, header, products, keys),
                                 first=first, flag=args.flag, full=full)
        if shown is None:  # the flag picked only series whose flag is left out: said why
            return 1
        print(shown)
    else:
        print(detail(picked[0], binary, one_label(every, picked[0]["key"]), weight) if len(picked) == 1
              else table(picked, first))
    if args.ledger is None and len(picked) == 1 and picked[0].get("plan") and picked[0].get("chosen"):  # a prediction's
        # caution (with --ledger: ``show_with_ledger``'s)
        from fitcore.review.plan_words import caution_of
        print(f"\n{caution_of(header.get('settings') or {})}")
    if args.product or typed:  # a look-alike is another series: said, not listed with it
        from .show import filter_look_alikes
        for note in filter_look_alikes(every, args.product, products, typed, str(args.results)):
            print(f"pricefold show: {note}", file=sys.stderr)
    return 0


def within(key: dict, header: dict, products, keys: dict) -> bool:
    """Whether ``show``'s ``--product`` and ``--key`` filters (``products`` and each of ``keys``' values: a
    ``fitcore.text.EitherForm``) keep a ledger series' ``key`` (its columns in the ledger's order: the product
    column named by the results' settings)."""
    product = (header.get("settings", {}).get("columns") or {}).get("product") or "product"
    return (not products or key.get(product) in products) and all(key.get(k) in v for k, v in keys.items())


def run_triage(args) -> int:
    from .triage_cli import run_triage as triage
    return triage(args)


def run_demo(args) -> int:
    from .demo import run_demo as demo
    from .triage_cli import open_triage
    with collector_paused():
        return demo(args, open_triage)


@stopping_cleanly
def run_ledger(args) -> int:
    if args.ledger_command == "carry":
        from .carry_cli import run_carry
        return run_carry(args)
    if args.ledger_command == "revoke":
        from .revoke_cli import run_revoke
        return run_revoke(args)
    from .ledger_cli import run
    return run(args)


@stopping_cleanly
def run_report(args) -> int:
    from .report.command import run
    return run(args)


COMMANDS = {"fit": run_fit, "show": run_show, "ledger": run_ledger, "triage": run_triage, "demo": run_demo,
            "report": run_report}


def _not_utf8(value) -> bool:
    """An argument holding bytes that are not UTF-8 (Python keeps each as a lone surrogate, U+DC80–U+DCFF)."""
    return isinstance(value, str) and any("\udc80" <= ch <= "\udcff" for ch in value)


def one_line(message: str) -> str:
    """A message as one line: a control character (a line break in a file's name) or a byte that is not UTF-8
    in it shown as ``text.clean`` shows it (␊, ⟨U+DCFF⟩), the rest as it is (texts in it are cleaned already)."""
    import re

    from fitcore.text import clean
    return re.sub("[\x00-\x1f\x7f\ud800-\udfff]", lambda found: clean(found.group()), message)


def half_done(args) -> list[str]:
    """A line for each step a killed fit left half done beside the results file a command reads (the files there may
    not belong together; the next fit writing them finishes the step: ``fitcore.outputs.journal``)."""
    path = getattr(args, "results", None) or (args.source if args.command == "triage" else None)
    if not isinstance(path, Path):
        return []
    from fitcore.outputs import unfinished
    return unfinished(path)


def main(argv: list[str] | None = None) -> int:
    import warnings

    from fitcore.errors import PricefoldError
    args = build_parser().parse_args(argv)
    undecodable = next((value for value in (sys.argv[1:] if argv is None else argv) if _not_utf8(value)), None)
    if undecodable is not None:  # pyarrow and the results' JSON cannot hold it: a traceback, after some work was done
        print(f"pricefold {args.command}: '{one_line(undecodable)}': holds bytes that are not UTF-8; pricefold "
              "reads file names and texts as UTF-8 (rename the file, or set the terminal to UTF-8)", file=sys.stderr)
        return 2
    for line in half_done(args):
        print(f"pricefold {args.command}: warning: {one_line(line)}", file=sys.stderr)
    from . import interrupts
    interrupts.named(f"pricefold {args.command}")
    try:
        with warnings.catch_warnings():
            # Floating-point trouble (1e308, 1e-320) is data: the engine masks non-finite values and marks
            # candidates unavailable; numpy's running commentary on it is noise to a user.
            warnings.filterwarnings("ignore", category=RuntimeWarning, module=r"(fitcore|numpy|pandas)(\.|$)")
            return COMMANDS[args.command](args)
    except PricefoldError as exc:
        print(f"pricefold {args.command}: {one_line(str(exc))}", file=sys.stderr)
        return 2
    except KeyboardInterrupt as exc:
        import signal

        from .interrupts import stopped_line
        signum = getattr(exc, "signum", signal.SIGINT)  # a kill or a closed terminal, as Ctrl+C (``interrupts``)
        try:  # what came in place before it: files written in full, ledger records (``interrupts.Stopped``)
            print(stopped_line(signum, getattr(exc, "written", None), getattr(exc, "recorded", None)), file=sys.stderr)
        except OSError:  # the terminal that sent SIGHUP is gone
            pass
        return 128 + signum
    except BrokenPipeError:  # the reader went away (``| head``): stop quietly, as other tools do
        import os
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0
    except OSError as exc:  # the system refused a write pricefold did not foresee (a full disk under stdout)
        where = (f": {exc.filename}" if exc.filename else "" if getattr(sys.stdout, "closed_by_shell", False)
                 else " writing the output")
        print(f"pricefold {args.command}: {exc.strerror or exc}{where}", file=sys.stderr)
        return IO_FAILED


def entry() -> None:
    """The installed ``pricefold`` command (and ``python -m pricefold``): ``main``, then the process ends
    without Python's teardown (``process_end``)."""
    from . import interrupts, streams
    from .process_end import end_process
    streams.set_up()
    interrupts.until_exit()
    try:
        code = main()
    except KeyboardInterrupt:  # before ``main`` knows the command: while the parser's modules load
        print("pricefold: interrupted; nothing was written", file=sys.stderr)
        code = 130
    came = interrupts.late()
    if came is not None and code == 0:  # a signal after the files or records were in place: its exit status, and why
        try:
            print(interrupts.stopped_line(*came), file=sys.stderr)
        except OSError:  # the terminal that sent SIGHUP is gone
            pass
        code = 128 + came[0]
    end_process(code)
