"""``pricefold ledger export``: the decision standing on each series, as CSV for planning systems.

Text cells that a spreadsheet would run as a formula (starting with ``=``, ``+``, ``-``, ``@``,
a tab or a carriage return — the common CSV-injection guidance) get a leading ``'`` unless
``--raw``; numbers are never touched.  Every row carries the ledger's head (``ledger_head``,
``SEQ:DIGEST``) so the planning side keeps a witness of the ledger it was exported from.
"""
from __future__ import annotations

import csv
import io
import json
import sys
from pathlib import Path

from fitcore import ledger
from fitcore.ledger.replay import series_id

from .ledger_cli import open_ledger

RISKY = ("=", "+", "-", "@", "\t", "\r")


def neutral(text: str) -> str:
    """A text cell made inert for spreadsheets: a leading ``'`` when it starts like a formula."""
    return "'" + text if text.startswith(RISKY) else text


def run_export(args) -> int:
    from fitcore.results.read import results_in_parts
    header, parts = results_in_parts(args.results)
    book = open_ledger(args.ledger, refuse=(ledger.BROKEN,), must_exist=True)
    from fitcore.outputs import check_outputs
    from fitcore.results.read import results_inputs
    check_outputs([(args.output, "export")], [("the ledger", args.ledger), ("the results", args.results),
                                              *results_inputs(header)])
    text = (lambda value: value) if args.raw else neutral
    buffer = io.StringIO()
    # RFC 4180 line ends: with "\r\n" as the terminator the writer also quotes a cell holding a lone
    # carriage return (with "\n" alone, Python 3.11 wrote it bare and the row split in two).
    writer = csv.writer(buffer, lineterminator="\r\n")

    def row(cells: list) -> None:  # text cells only: numbers (floats, ints) are written as they are
        writer.writerow([text(cell) if isinstance(cell, str) else cell for cell in cells])

    columns = header.get("settings", {}).get("columns") or {"product": "product", "segments": []}
    row([columns["product"], *columns.get("segments", []), "status", "model", "family", "coef", "analyst", "at",
         "note", "plan_price", "plan_volume", "plan_lo", "plan_hi", "carried_from", "ledger_head"])
    count, head = 0, book.head_text
    for record in (record for series in parts for record in series):
        count += 1
        history = book.histories.get(series_id(record["key"]))
        status = history.status(record["fingerprint"]) if history else "pending"
        current = history.current if history else None
        model = current["model"] if current else record["chosen"]
        cand = next((c for c in record["candidates"] if c["name"] == model), None)
        plan = record.get("plan") or {}
        # The standing model's plan numbers: the proposal's from the plan; another candidate's from its own
        # fields where the results hold them (its interval only where they do).
        own = {"volume": "plan_volume", "lo": "plan_lo", "hi": "plan_hi"}
        at_plan = plan if model == record["chosen"] else {k: (cand or {}).get(v) for k, v in own.items()}
        family, coef = (cand["family"] if cand else ""), (json.dumps(cand["coef"]) if cand and cand["coef"] else "")
        if status == "stale":  # signed on other data: the signed model's numbers, never this fit's
            family, coef, at_plan = signed_columns(current)
            plan = {"price": at_plan.get("price")}
        row([*(str(value) for value in record["key"].values()), status, model or "", family, coef,
             current["analyst"] if current else "", current["at"] if current else "",
             current.get("note", "") if current else "", _number(plan.get("price")),
             _number(at_plan.get("volume")), _number(at_plan.get("lo")), _number(at_plan.get("hi")),
             carried_from(history), head])
    write_text(args.output, buffer.getvalue())
    print(f"{count:,} series written to {args.output} (ledger head {head})", file=sys.stderr)
    return 0


def signed_columns(decision: dict) -> tuple[str, str, dict]:
    """``(family, coef, plan)`` of a decision standing on other data, from its ``signed`` snapshot (plan:
    price, volume, lo, hi as signed); empty when it has none (a ``/1`` record, a hold)."""
    snapshot = decision.get("signed") or {}
    if not snapshot:
        return "", "", {}
    coef = json.dumps(snapshot["coef"]) if snapshot.get("coef") else ""
    return snapshot.get("family") or "", coef, snapshot.get("plan") or {}


def carried_from(history) -> str:
    """``SEQ:DIGEST`` of the accept or override a standing ``carry`` carries forward ('' when none stands)."""
    current = history.current if history else None
    if current is None or current["action"] != "carry":
        return ""
    carried = next((r for r in history.records if r["digest"] == current.get("carries")), None)
    return f"{carried['seq']}:{carried['digest']}" if carried else f"?:{current.get('carries')}"


def _number(value):
    return "" if value is None else value


def write_text(path: Path, text: str) -> None:
    """Write through the project's one atomic writer (a new file gets 0666 less the umask; an existing
    one keeps its mode; a failed run leaves an earlier file whole)."""
    from fitcore.outputs import atomic_write
    atomic_write(path, lambda handle: handle.write(text.encode("utf-8")))
