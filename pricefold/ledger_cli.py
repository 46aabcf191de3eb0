"""``pricefold ledger …``: verify, show, export and bulk-accept sign-offs."""
from __future__ import annotations

import csv
import getpass
import io
import json
import os
import socket
import sys
from pathlib import Path

from fitcore import ledger
from fitcore.ledger.replay import replay, series_id
from fitcore.results.read import results_in_parts
from fitcore.text import clean

from .show import key_text

KEY_VARIABLE = "PRICEFOLD_LEDGER_KEY"


def ledger_key() -> bytes | None:
    value = os.environ.get(KEY_VARIABLE)
    return value.encode("utf-8") if value else None


def identity(analyst: str | None) -> ledger.Identity:
    try:
        import pwd
        os_user = pwd.getpwuid(os.getuid()).pw_name
    except (ImportError, KeyError):
        os_user = getpass.getuser()
    return ledger.Identity(analyst=analyst or os_user, os_user=os_user, host=socket.gethostname())


def add_parser(commands) -> None:
    parser = commands.add_parser("ledger", help="verify, show or export the sign-off ledger",
                                 description="The ledger records every sign-off decision, chained so that any "
                                             f"later edit is detected. Set {KEY_VARIABLE} to key the chain.")
    sub = parser.add_subparsers(dest="ledger_command", required=True, metavar="ACTION")
    verify = sub.add_parser("verify", help="check the chain; exit 1 and one line per problem if it is broken")
    verify.add_argument("ledger", type=Path, metavar="LEDGER")
    show = sub.add_parser("show", help="the decisions, oldest first")
    show.add_argument("ledger", type=Path, metavar="LEDGER")
    show.add_argument("--product", action="append", default=[], metavar="P", help="only this product (repeatable)")
    export = sub.add_parser("export", help="the current decision per series, as CSV for planning systems")
    export.add_argument("ledger", type=Path, metavar="LEDGER")
    export.add_argument("--results", type=Path, required=True, metavar="RESULTS")
    export.add_argument("-o", "--output", type=Path, required=True, metavar="CSV")
    bulk = sub.add_parser("accept-unflagged", help="accept the proposal for every series with no flag and no decision")
    bulk.add_argument("results", type=Path, metavar="RESULTS")
    bulk.add_argument("--ledger", type=Path, required=True, metavar="LEDGER")
    bulk.add_argument("--analyst", default=None, metavar="NAME", help="display name (default: the OS user)")
    bulk.add_argument("--note", default="", metavar="TEXT")


def run(args) -> int:
    return {"verify": run_verify, "show": run_show, "export": run_export,
            "accept-unflagged": run_accept_unflagged}[args.ledger_command](args)


def run_verify(args) -> int:
    problems = ledger.verify(args.ledger, ledger_key())
    for problem in problems:
        print(f"{args.ledger}: {problem}")
    if not problems:
        records, _ = ledger.read(args.ledger)
        kind = "keyed (HMAC-SHA-256)" if ledger_key() else "SHA-256"
        print(f"{args.ledger}: intact, {len(records)} records, {kind} chain")
    return 1 if problems else 0


def run_show(args) -> int:
    records, problems = ledger.read(args.ledger)
    for problem in problems:
        print(f"{args.ledger}: {problem}", file=sys.stderr)
    for r in records:
        if args.product and next(iter(r["series"].values())) not in args.product:
            continue
        model = r.get("model") or ""
        if r["action"] == "override":
            model = f"{model} instead of {r.get('proposed')}"
        note = f" — {clean(r['note'])}" if r.get("note") else ""
        print(f"#{r['seq']:<5} {r['at']}  {clean(r['analyst']):<12} {r['action']:<8} {model:<22} "
              f"{key_text(r['series'])}{note}")
    return 0


def run_export(args) -> int:
    from fitcore.outputs import check_outputs
    from fitcore.results.read import results_inputs
    header, parts = results_in_parts(args.results)
    check_outputs([(args.output, "export")], [("the ledger", args.ledger), ("the results", args.results),
                                              *results_inputs(header)])
    records, problems = ledger.read(args.ledger)
    if problems:
        print(f"{args.ledger}: {problems[0]} (exported from the whole records before it)", file=sys.stderr)
    histories = replay(records)
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    columns = header.get("settings", {}).get("columns") or {"product": "product", "segments": []}
    writer.writerow([columns["product"], *columns.get("segments", []), "status", "model", "family", "coef",
                     "analyst", "at", "note", "plan_price", "plan_volume", "plan_lo", "plan_hi"])
    count = 0
    for record in (record for series in parts for record in series):
        count += 1
        history = histories.get(series_id(record["key"]))
        status = history.status(record["fingerprint"]) if history else "pending"
        current = history.current if history else None
        model = current["model"] if current else record["chosen"]
        cand = next((c for c in record["candidates"] if c["name"] == model), None)
        plan = record.get("plan") or {}
        same = model == record["chosen"]
        writer.writerow([*record["key"].values(), status, model or "", cand["family"] if cand else "",
                         json.dumps(cand["coef"]) if cand and cand["coef"] else "",
                         current["analyst"] if current else "", current["at"] if current else "",
                         current.get("note", "") if current else "", plan.get("price", ""),
                         (plan.get("volume") if same else (cand or {}).get("plan_volume", "")) or "",
                         plan.get("lo", "") if same else "", plan.get("hi", "") if same else ""])
    _atomic_text(args.output, buffer.getvalue())
    print(f"{count:,} series written to {args.output}", file=sys.stderr)
    return 0


def run_accept_unflagged(args) -> int:
    header, parts = results_in_parts(args.results)
    digest = ledger.results_digest(header)

    def decide(records):
        histories = replay(records)
        for record in (record for series in parts for record in series):
            if record["flags"] or not record["chosen"]:
                continue
            history = histories.get(series_id(record["key"]))
            if history is not None and history.current is not None:
                continue
            yield ledger.Entry(series=record["key"], action="accept", fingerprint=record["fingerprint"],
                               results=digest, model=record["chosen"], proposed=record["chosen"], note=args.note)

    written = ledger.append(args.ledger, decide, identity(args.analyst), key=ledger_key())
    print(f"accepted {len(written):,} unflagged series without a decision → {args.ledger}", file=sys.stderr)
    return 0


def _atomic_text(path: Path, text: str) -> None:
    from fitcore.outputs import atomic_write
    atomic_write(path, lambda handle: handle.write(text.encode("utf-8")))
