"""The ``ledger`` command's arguments, ``ledger carry``'s and ``fit --ledger``: built with every run's parser,
so kept apart from the commands' code (the ledger modules, numpy: 0.05–0.07 s a run of ``fit`` that never
opens a ledger)."""
from __future__ import annotations

import argparse
from pathlib import Path

KEY_VARIABLE = "PRICEFOLD_LEDGER_KEY"


def add_ledger_parser(commands):
    from .options import OneFile
    parser = commands.add_parser("ledger", help="verify, show or export the sign-off ledger",
                                 description="The ledger records every sign-off decision, chained so that any "
                                             f"later edit is detected. Set {KEY_VARIABLE} to key the chain.")
    sub = parser.add_subparsers(dest="ledger_command", required=True, metavar="ACTION")
    verify = sub.add_parser("verify", help="check the chain and print its head; exit 1 and one line per problem "
                                           "if it is broken; exit 3 if it is intact but ends in an interrupted "
                                           "write (a torn last line or an incomplete batch, left out)")
    verify.add_argument("ledger", type=Path, metavar="LEDGER")
    verify.add_argument("--head", metavar="SEQ:DIGEST", default=None,
                        help="a head printed earlier: exit 1 unless the ledger still holds exactly that record")
    show = sub.add_parser("show", help="the decisions, oldest first")
    show.add_argument("ledger", type=Path, metavar="LEDGER")
    show.add_argument("--product", action="append", default=[], metavar="P",
                      help="only this product (repeatable; either Unicode normal form of it, or as shown)")
    show.add_argument("--product-column", default=None, metavar="COL",
                      help="the key column that names the product (default: the settings file's, else product)")
    export = sub.add_parser("export", help="the current decision per series, as CSV for planning systems")
    export.add_argument("ledger", type=Path, metavar="LEDGER")
    export.add_argument("--results", type=Path, required=True, metavar="RESULTS")
    export.add_argument("-o", "--output", action=OneFile, required=True, metavar="CSV",
                        help="the CSV file to write (- : standard output, for a pipe)")
    export.add_argument("--raw", action="store_true",
                        help="write text cells as they are (by default a text cell starting with = + - @, "
                             "a tab or a carriage return gets a leading ' so spreadsheets do not run it)")
    export.add_argument("-q", "--quiet", action="store_true",
                        help="no \"N series written\" line on success (warnings and errors still go to stderr)")
    bulk = sub.add_parser("accept-unflagged", help="accept the proposal for every series with no flag and no decision",
                          usage="%(prog)s [-h] --ledger LEDGER [--analyst NAME] [--note TEXT] [--new-series] [-q] "
                                "RESULTS")
    bulk.add_argument("results", type=Path, metavar="RESULTS")
    # required, and checked by the command: left out, it names the ledger the results were fitted against
    bulk.add_argument("--ledger", type=Path, default=None, metavar="LEDGER",
                      help="the ledger to record into (required: there is no default)")
    bulk.add_argument("--analyst", default=None, metavar="NAME", help="display name (default: the OS user)")
    bulk.add_argument("--note", action=Once, default="", metavar="TEXT")
    bulk.add_argument("--new-series", action="store_true",
                      help="yes, these results' series new to the ledger are new series: accept them where the "
                           "ledger holds none of the results' series (the same key columns, other values) or "
                           "where some look like its own under another spelling (north for North)")
    bulk.add_argument("-q", "--quiet", action="store_true", help="no summary and no head on success (warnings still go to stderr)")
    revoke = sub.add_parser("revoke", help="withdraw your own standing decisions (named records, or a whole batch) "
                                           "with a note saying why; what stood before stands again (not carried "
                                           "to new data until someone decides the series)")
    revoke.add_argument("ledger", type=Path, metavar="LEDGER")
    which = revoke.add_mutually_exclusive_group(required=True)
    which.add_argument("--record", type=record_number, nargs="+", metavar="N",
                       help="the records to withdraw, numbered as 'ledger show' prints them (#N); all or nothing")
    which.add_argument("--batch", type=record_number, action=Once, metavar="N",
                       help="every decision of the batch record #N belongs to (an accept-unflagged or carry run) "
                            "still standing and yours")
    revoke.add_argument("--note", action=Once, required=True, metavar="TEXT",
                        help="why (required: the ledger keeps it)")
    revoke.add_argument("--analyst", default=None, metavar="NAME", help="display name (default: the OS user)")
    revoke.add_argument("-q", "--quiet", action="store_true", help="no summary and no head on success")
    return sub


class Once(argparse.Action):
    """An option given once (argparse kept the last of two silently: ``--note x --note y`` recorded y,
    ``--batch 1 --batch 158`` withdrew only the second)."""

    def __call__(self, parser, namespace, values, option_string=None):
        if getattr(namespace, self.dest, None) not in (None, "", self.default):
            parser.error(f"{option_string} given twice: give it once")
        setattr(namespace, self.dest, values)


def record_number(text: str) -> int:
    """A record's number as ``ledger show`` prints it (``12`` or ``#12``): ASCII digits only (Python's ``int``
    also reads ``1_0``, ``+4`` and other scripts' digits)."""
    digits = text[1:] if text.startswith("#") else text
    if not (digits.isascii() and digits.isdigit()) or int(digits) < 1:
        raise argparse.ArgumentTypeError(f"expected a record number as 'ledger show' prints it (12 or #12), "
                                         f"got {text!r}")
    return int(digits)


def add_fit_ledger_option(parser) -> None:
    parser.add_argument("--ledger", type=Path, default=None, metavar="LEDGER",
                        help="backtest every signed series whose data changed against the rows since, flag "
                             "'shifted' ones, and record the ledger's head in the results (for 'ledger carry')")


def add_carry_parser(sub) -> None:
    carry = sub.add_parser("carry", help="carry signed decisions forward to new data where the signed curve "
                                         "passed its backtest and is still the proposal",
                           description="Record a carry for every series whose standing decision was made on "
                                       "older data, whose signed shape is still the proposal (an override: still "
                                       "available and within one standard error of the lowest CV error), whose "
                                       "backtest passed, with no stop flag and no 'shifted' flag, and which no revoke "
                                       "left standing (a series revoked waits for a person's decision). RESULTS "
                                       "must come from 'pricefold fit --ledger' on the same ledger.")
    carry.add_argument("results", type=Path, metavar="RESULTS")
    carry.add_argument("--ledger", type=Path, required=True, metavar="LEDGER")
    carry.add_argument("--analyst", default=None, metavar="NAME", help="display name (default: the OS user)")
    carry.add_argument("--note", action=Once, default="", metavar="TEXT")
    carry.add_argument("--carry-revised", action="store_true",
                       help="also carry series whose rows up to the signed date were revised but still fit the "
                            "signed curve (a rolling window: the oldest weeks dropped); by default they are left "
                            "for a human, as rows restated or re-dated could pass for rows since")
    carry.add_argument("-q", "--quiet", action="store_true", help="no summary and no head on success")
