"""``pricefold ledger revoke``: withdraw one's own standing decisions from the command line, with a note saying why.

Named as ``ledger show`` numbers them (``--record 12 40``: all or nothing), or every decision of the batch a record
belongs to (``--batch 12``: an ``accept-unflagged`` or ``carry`` run, taken back whole; its decisions replaced since,
or not one's own, are left and counted).  The ledger's rule applies under its lock: a decision is withdrawn only by
the OS user who made it; here, only the decision in effect on its series (one under a later decision is not, as on
the screen); what stood before it stands again (or the series is pending).  Binding: the records named are judged
as the ledger holds them when the lock is taken, so a decision replaced by another analyst since ``ledger show``
printed it is not withdrawn.
"""
from __future__ import annotations

import sys

from fitcore import ledger
from fitcore.ledger.replay import own_standing, series_id
from fitcore.ledger.rules import label, person, what_happened
from fitcore.text import clean, revealed

from .ledger_cli import identity, open_ledger, record

DECIDING = ("accept", "override", "hold", "carry")
SAID = 5  # decisions withdrawn named one a line; a batch's others counted


def run_revoke(args) -> int:
    if not args.note.strip():
        raise ledger.LedgerError("--note: say why the decisions are withdrawn (the ledger keeps it); nothing was "
                                 "written")
    if not args.ledger.exists():
        raise ledger.LedgerError(f"{args.ledger}: no such ledger: nothing to withdraw (nothing was written)")
    book = open_ledger(args.ledger, refuse=(ledger.BROKEN, ledger.UNVERIFIABLE))
    who = identity(args.analyst)
    left: list[str] = []
    taken: list[dict] = []  # the decisions withdrawn, as the ledger held them under the lock

    def entries(records: list[dict]) -> list[ledger.Entry]:  # under the lock: the ledger as it stands now
        left.clear()
        taken.clear()
        out = []
        for record in named(args, records):
            history = book.histories.get(series_id(record["series"]))
            why = why_not(record, history, who)
            if why is not None:
                if args.batch is None:
                    raise ledger.LedgerError(f"{args.ledger}: #{record['seq']} ({label(record['series'])}): {why}; "
                                             "nothing was withdrawn")
                left.append(why)
                continue
            taken.append(history.current)
            out.append(ledger.Entry(series=record["series"], action="revoke", fingerprint=record["fingerprint"],
                                    results=record["results"], model=record.get("model"),
                                    proposed=record.get("proposed"), note=args.note,
                                    supersedes=history.latest["digest"]))
        if not out:
            raise ledger.LedgerError(f"{args.ledger}: none of the batch of #{args.batch} is still standing and "
                                     f"yours (the first: {left[0]}); nothing was withdrawn")
        return out

    written = record(book, entries, who)
    if not args.quiet:
        kept = f"; {len(left):,} of the batch left as they are (no longer standing, or not yours)" if left else ""
        if args.batch is not None and not (by_seq(book.records)[args.batch].get("batch") or {}).get("id"):
            kept += f" (#{args.batch} was appended alone, a batch of one: itself only)"
        print(f"withdrew {len(written):,} decision{'s' * (len(written) != 1)}{kept} → {args.ledger}", file=sys.stderr)
        for decision in taken[:SAID]:  # a space at a value's end shown (it read as a double space before " · ")
            shown = " · ".join(revealed(clean(str(value))) for value in decision["series"].values())
            print(f"  #{decision['seq']} {shown}: {what_happened(decision)}", file=sys.stderr)
        if len(taken) > SAID:
            print(f"  … and {len(taken) - SAID:,} more (pricefold ledger show lists them)", file=sys.stderr)
        again = sum(1 for r in written if book.histories[series_id(r["series"])].revoked)  # (written: replayed)
        if again:  # ``SeriesHistory.revoked``: carry leaves them (due ``revoked``) until a person decides them
            said = ("an earlier decision stands again: 'ledger carry' will not carry it" if len(written) == 1 else
                    f"an earlier decision stands again on {again:,} of them: 'ledger carry' will not carry those")
            print(f"{said} to new data until someone accepts, overrides or holds the series", file=sys.stderr)
        print(f"ledger head {book.head_text}", file=sys.stderr)
    others = sorted({clean(d["analyst"]) for d in taken if d["analyst"] != who.analyst})
    if others:  # one OS user may record under several names: the rule is the OS user's (said even with -q)
        print(f"note: withdrawn under the name {clean(who.analyst)!r}, recorded under {', '.join(map(repr, others))} "
              f"by the same OS user ({clean(who.os_user)}): the ledger lets an OS user withdraw its own decisions "
              "whatever name they were recorded under", file=sys.stderr)
    return 0


def named(args, records: list[dict]) -> list[dict]:
    """The records ``--record`` names (each once, one a series) or the batch of ``--batch``'s record, in order."""
    numbered = by_seq(records)
    wanted = [args.batch] if args.batch is not None else args.record
    for seq in wanted:
        if seq not in numbered:
            held = f"the ledger's records are #1 to #{len(records)}" if records else "the ledger holds no record"
            raise ledger.LedgerError(f"{args.ledger}: no record #{seq} ({held}: see 'pricefold ledger show'); "
                                     "nothing was withdrawn")
    if args.batch is not None:
        batch = (numbered[args.batch].get("batch") or {}).get("id")
        return [r for r in records if batch and (r.get("batch") or {}).get("id") == batch] or [numbered[args.batch]]
    chosen = [numbered[seq] for seq in dict.fromkeys(wanted)]
    seen: dict[str, int] = {}
    for record in chosen:
        first = seen.setdefault(series_id(record["series"]), record["seq"])
        if first != record["seq"]:
            raise ledger.LedgerError(f"{args.ledger}: #{first} and #{record['seq']} are both of "
                                     f"{label(record['series'])}: one revoke withdraws one decision a series "
                                     "(the latest of yours); nothing was withdrawn")
    return chosen


def by_seq(records: list[dict]) -> dict[int, dict]:
    return {record["seq"]: record for record in records}


def why_not(record: dict, history, who: ledger.Identity) -> str | None:
    """Why ``record`` cannot be withdrawn by ``who`` now (None: it can)."""
    if record["action"] == "note":
        return "a note, not a decision: it changes nothing to withdraw (add a note saying what it got wrong)"
    if record["action"] not in DECIDING:
        return f"a {record['action']}, not a decision"
    mine = own_standing(history, who.analyst, who.os_user)
    current = history.current if history else None
    if current is not None and current["digest"] == record["digest"] and mine is not None \
            and mine["digest"] == record["digest"]:
        return None
    if current is None or current["digest"] != record["digest"]:  # the one in effect only, as the screen's key
        return f"no longer stands ({what_happened(current)} since)" if current else "no longer stands (withdrawn since)"
    return f"made by {person(record)}, not by you (OS user {who.os_user})"
