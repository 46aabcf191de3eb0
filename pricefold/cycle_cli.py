"""Across planning cycles: ``fit --ledger`` (backtest signed curves, flag ``shifted``), ``ledger carry``
(carry a signed decision to new data where nothing moved), ``show --ledger`` (what each series needs).

The numbers come from ``fitcore.ledger.backtest``; the ledger is read through the verifying reader.
"""
from __future__ import annotations

import sys
from collections import Counter
from pathlib import Path

from fitcore import ledger
from fitcore.ledger.replay import series_id

from .ledger_cli import identity, open_ledger


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
                                       "backtest passed, with no stop flag and no 'shifted' flag. RESULTS must "
                                       "come from 'pricefold fit --ledger' on the same ledger.")
    carry.add_argument("results", type=Path, metavar="RESULTS")
    carry.add_argument("--ledger", type=Path, required=True, metavar="LEDGER")
    carry.add_argument("--analyst", default=None, metavar="NAME", help="display name (default: the OS user)")
    carry.add_argument("--note", default="", metavar="TEXT")
    carry.add_argument("-q", "--quiet", action="store_true", help="no summary and no head on success")


def same_file(a: Path, b: Path) -> bool:
    try:
        return a.resolve() == b.resolve() or (a.exists() and b.exists() and a.samefile(b))
    except OSError:
        return False


def backtest_against(ledger_path: Path, results, diagnosis, thresholds, outputs=()):
    """``(diagnosis with 'shifted', backtest)`` of ``results`` (a fit, rows loaded) against the ledger."""
    from fitcore.ledger.backtest import backtest
    from fitcore.review.flags import mark_shifted
    for output in outputs:
        if same_file(Path(output), ledger_path):
            raise ledger.LedgerError(f"{output}: is the ledger; choose another results name")
    book = open_ledger(ledger_path, refuse=(ledger.BROKEN,))
    found = backtest(results, book.histories, thresholds,
                     {"path": str(ledger_path.resolve()), "head": book.head_text, "state": book.state})
    return mark_shifted(diagnosis, found), found


def backtest_line(found) -> str:
    """One line for the fit's summary: signed series on changed data, by backtest outcome."""
    counts = found.counts()
    total = sum(counts.values())
    if not total:
        return f"ledger: no signed series has new data (head {found.source['head'][:20]}…)"
    parts = " · ".join(f"{name} {count:,}" for name, count in sorted(counts.items()))
    return f"ledger: {total:,} signed series on changed data — backtest {parts}; shifted {int(found.shifted.sum()):,}"


# -- show --ledger ---------------------------------------------------------------------------------------

def ledger_state(record: dict, book) -> tuple[str, str | None]:
    """(status in the ledger, what it needs) of a results record."""
    from fitcore.ledger.backtest import due
    history = book.histories.get(series_id(record["key"]))
    status = history.status(record["fingerprint"]) if history else "pending"
    if status == "accepted" and history.current["action"] == "carry":
        status = "accepted (carried)"
    needs = due(record.get("backtest")) if status == "stale" else None
    if status == "stale" and needs is None:
        needs = "no backtest in these results (fit with --ledger)"
    return status, needs


def show_with_ledger(records: list[dict], ledger_path: Path) -> str:
    """``pricefold show --ledger``: one series in full with its ledger state and backtest, or a list."""
    from fitcore.review.sentences import shift_sentence

    from .show import detail, in_attention_order, key_text
    book = open_ledger(ledger_path)
    if len(records) == 1:
        record = records[0]
        status, needs = ledger_state(record, book)
        lines = [detail(record), "", f"ledger: {status}" + (f" — due: {needs}" if needs else "")]
        if record.get("backtest"):
            lines.append("  " + shift_sentence(record["backtest"], record["chosen"]))
        return "\n".join(lines)
    lines = [f"{'series':<40} {'n':>5} {'chosen':<7} {'status':<19} {'due':<16} {'ratio':>5} {'cover':>5}  flags"]
    for record in in_attention_order(records):
        status, needs = ledger_state(record, book)
        bt = record.get("backtest") or {}
        ratio = f"{bt['error_ratio']:.1f}" if bt.get("error_ratio") is not None else "—"
        cover = f"{bt['coverage'] * 100:.0f}%" if bt.get("coverage") is not None else "—"
        flags = " ".join(f["code"] for f in record["flags"]) or "—"
        lines.append(f"{key_text(record['key'])[:40]:<40} {record['n']:>5} {record['chosen'] or '—':<7} "
                     f"{status:<19} {(needs or '—')[:16]:<16} {ratio:>5} {cover:>5}  {flags}")
    return "\n".join(lines)


# -- ledger carry ------------------------------------------------------------------------------------

def _stop_codes() -> set[str]:
    from fitcore.review.flags import SEVERITY
    return {code for code, severity in SEVERITY.items() if severity == "stop"}


def _within_one_se(record: dict, name: str) -> bool:
    """The candidate is available and its CV error within one SE of the lowest (the rule's own band)."""
    cands = [c for c in record["candidates"] if c["available"] and c["cv_mse"] is not None]
    mine = next((c for c in cands if c["name"] == name), None)
    if mine is None:
        return False
    best = min(cands, key=lambda c: c["cv_mse"])
    return mine["cv_mse"] <= best["cv_mse"] + (best["cv_se"] or 0.0)


def carry_plan(parts, stops: set[str]) -> tuple[list[dict], Counter]:
    """The records whose signed decision may be carried (before the ledger is read under its lock),
    and why each other signed series with changed data stays for a human."""
    keep, left = [], Counter()
    for part in parts:
        for record in part:
            bt = record.get("backtest")
            if bt is None:
                continue
            codes = {f["code"] for f in record["flags"]}
            if bt["status"] != "passed":
                left["backtest failed" if bt["status"] == "failed" else
                     {"no-dates": "no dates", "undated": "no dates", "no-new-rows": "no new rows",
                      "unsigned": "no signed model"}.get(bt["status"], bt["status"])] += 1
            elif "shifted" in codes:
                left["shifted"] += 1
            elif codes & stops:
                left["stop flag"] += 1
            elif record["chosen"] is None:
                left["no candidate"] += 1
            else:
                keep.append(record)
    return keep, left


def run_carry(args) -> int:
    from fitcore.ledger.snapshot import from_records
    from fitcore.results.read import results_in_parts
    header, parts = results_in_parts(args.results)
    source = header.get("ledger")
    if not source:
        raise ledger.LedgerError(f"{args.results}: not made by 'pricefold fit --ledger', so it holds no backtest to "
                                 "carry on; fit again with --ledger")
    if not same_file(Path(source["path"]), args.ledger):
        raise ledger.LedgerError(f"{args.results}: backtested against {source['path']}, not {args.ledger}; "
                                 "fit again with --ledger on this ledger")
    digest = ledger.results_digest(header)
    level = header["settings"].get("level", 0.95)
    wanted, left = carry_plan(parts, _stop_codes())
    book = open_ledger(args.ledger, refuse=(ledger.BROKEN, ledger.UNVERIFIABLE))
    outcome: Counter = Counter()

    def decide(records):  # under the lock: book.histories is what the ledger holds now
        outcome.clear()
        chosen = []
        for record in wanted:
            bt = record["backtest"]
            history = book.histories.get(series_id(record["key"]))
            current = history.current if history else None
            if current is not None and current["action"] == "carry" and current["fingerprint"] == record["fingerprint"]:
                outcome["already carried"] += 1
            elif history is None or history.latest["digest"] != bt["latest"]:
                outcome["changed since the fit"] += 1
            elif bt["candidate"] != record["chosen"] and not (
                    _carried_action(history, bt["carries"]) == "override"
                    and _within_one_se(record, bt["candidate"])):
                outcome["shape changed"] += 1
            else:
                chosen.append((record, history.latest["digest"]))
        signed = from_records([(record, record["backtest"]["candidate"]) for record, _ in chosen], level)
        for (record, latest), snapshot in zip(chosen, signed):
            yield ledger.Entry(series=record["key"], action="carry", fingerprint=record["fingerprint"],
                               results=digest, model=record["backtest"]["candidate"], proposed=record["chosen"],
                               note=args.note, supersedes=latest, flags=[f["code"] for f in record["flags"]],
                               signed=snapshot, carries=record["backtest"]["carries"])

    written = book.append(decide, identity(args.analyst))
    left.update(outcome)
    if not args.quiet:
        rest = " · ".join(f"{why} {count:,}" for why, count in left.most_common()) or "none"
        print(f"carried {len(written):,} signed series to the new data → {args.ledger}", file=sys.stderr)
        print(f"left for a human: {sum(left.values()):,} ({rest})", file=sys.stderr)
        print(f"ledger head {book.head_text}", file=sys.stderr)
    return 0


def _carried_action(history, digest: str) -> str | None:
    """The action (accept or override) of the decision with ``digest`` in a series' history."""
    return next((r["action"] for r in reversed(history.records) if r["digest"] == digest), None)
