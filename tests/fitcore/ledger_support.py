"""Helpers shared by the ledger tests: entries, identities, processes started together."""
from __future__ import annotations

import multiprocessing
from pathlib import Path

from fitcore import ledger
from fitcore.ledger.replay import series_id

ANA = ledger.Identity("ana", "ana", "server-1")
BO = ledger.Identity("bo", "bo", "server-1")
V1 = Path(__file__).parent / "ledger_v1"  # made by the pricefold-ledger/1 writer (commit 99d7d6b)
V1_KEY = b"fixture-key"


def entry(product, action="accept", model="poly1", note="", fingerprint="f1", **fields):
    return ledger.Entry(series={"product": product}, action=action, fingerprint=fingerprint, results="r1",
                        model=model, proposed="poly1", note=note, **fields)


def after(book: ledger.Ledger, product: str) -> str | None:
    """The digest a decision on ``product`` supersedes: the series' latest record, as ``book`` read it."""
    history = book.histories.get(series_id({"product": product}))
    return history.latest["digest"] if history else None


def lines(path: Path) -> list[bytes]:
    return path.read_bytes().splitlines(keepends=True)


def run_together(target, arguments, timeout=60) -> list[int]:
    """Start one forked process per argument tuple at once; their exit codes."""
    context = multiprocessing.get_context("fork")
    workers = [context.Process(target=target, args=args) for args in arguments]
    for w in workers:
        w.start()
    for w in workers:
        w.join(timeout)
    return [w.exitcode for w in workers]
