"""Helpers shared by the ledger tests: entries, identities, processes started together."""
from __future__ import annotations

import multiprocessing
import os
import signal
import time
from collections import Counter
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


def slow_disk(chunk=4096, first=None):
    """In this process, ``os.write`` lands at most ``chunk`` bytes a call, a little later each time
    (a slow or network disk): a kill then falls inside an append often, not once in thousands.
    ``first``: called at the first write (so a kill can be timed from there, whatever came before)."""
    real = os.write

    def write(fd, data):
        nonlocal first
        if first is not None:
            first, call = None, first
            call()
        time.sleep(0.0002)
        return real(fd, bytes(data[:chunk]))
    os.write = write


def kill_at_random(target, args, rng, most: float) -> None:
    """Fork ``target(*args, ready)``, wait until it sets ``ready``, then SIGKILL it within ``most`` seconds."""
    context = multiprocessing.get_context("fork")
    ready = context.Event()
    child = context.Process(target=target, args=(*args, ready))
    child.start()
    assert ready.wait(30)
    time.sleep(rng.uniform(0.0, most))
    os.kill(child.pid, signal.SIGKILL)
    child.join()


def whole_batches(book: ledger.Ledger) -> bool:
    """Every batch the reader counts is complete: its records are 1..N of one id, N of them."""
    sizes = Counter(r["batch"]["id"] for r in book.records if r["batch"])
    return all(sizes[r["batch"]["id"]] == r["batch"]["size"] for r in book.records if r["batch"])


def edit_in_place(path, line, old, new, keep_mtime=False):
    """Change ``old`` to ``new`` (the same length) in ``line`` (1-based) of the file, in place: the inode, the
    size and every other byte stay as they were (``keep_mtime``: the modification time too)."""
    assert len(old) == len(new)
    before = path.stat()
    data = path.read_bytes()
    start = sum(map(len, data.splitlines(keepends=True)[:line - 1]))
    at = data.index(old, start)
    assert at < start + len(data.splitlines(keepends=True)[line - 1])
    with open(path, "r+b") as handle:
        handle.seek(at)
        handle.write(new)
    if keep_mtime:
        os.utime(path, ns=(before.st_atime_ns, before.st_mtime_ns))
    after = path.stat()
    assert (after.st_ino, after.st_size) == (before.st_ino, before.st_size)
