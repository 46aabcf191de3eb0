"""Ctrl+C, ``kill`` (SIGTERM) and a closed SSH session (SIGHUP) during the ledger commands.

A trial found Ctrl+C right after a carry's append said "interrupted; nothing was written" with all 139 records in,
a large batch stopped part-way left an incomplete batch under the same words, and SIGTERM or SIGHUP ended
carry, accept-unflagged, export and report at once and in silence.  Now a signal during the write is acted on
once the records are whole and synced, and every command ends on one line saying what stands, exit 128 + n.
"""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import time

import pytest

from fitcore import ledger
from fitcore.ledger import files
from pricefold.cli import main

from .test_cycle import fit, write_weeks


@pytest.fixture
def results(tmp_path):
    write_weeks(tmp_path / "c1.csv", 40)
    fit(tmp_path / "c1.csv", tmp_path / "r1.json")
    return tmp_path / "r1.json"


def test_ctrl_c_during_the_write_lands_after_it_and_says_what_was_recorded(results, monkeypatch, capsys):
    book = results.with_name("L.jsonl")
    real = files.write_all

    def interrupted(*args, **kwargs):  # Ctrl+C as the records start to go out
        signal.raise_signal(signal.SIGINT)
        return real(*args, **kwargs)

    monkeypatch.setattr(files, "write_all", interrupted)
    assert main(["ledger", "accept-unflagged", str(results), "--ledger", str(book)]) == 130
    err = capsys.readouterr().err.splitlines()
    whole = ledger.Ledger(book)
    n = len(whole.records)
    assert n >= 2 and whole.state == ledger.INTACT and whole.notes == []  # the batch whole, no tail to set aside
    assert err[0].startswith(f"accepted {n} unflagged series")  # the command ended as it would have
    assert err[-1] == f"pricefold ledger: interrupted; after recording {n} records in {book} in full (#1–#{n})"


@pytest.mark.parametrize("name", ["TERM", "HUP"])
def test_a_kill_or_a_closed_terminal_during_an_append_is_one_line_and_128_plus_n(results, name):
    signum = getattr(signal, f"SIG{name}")
    for _ in range(5):  # the signal must come before the command ends (it does, but a loaded machine may differ)
        book = results.with_name(f"L-{name}.jsonl")
        book.unlink(missing_ok=True)
        run = subprocess.Popen([sys.executable, "-m", "pricefold", "ledger", "accept-unflagged", str(results),
                                "--ledger", str(book)], stderr=subprocess.PIPE, text=True, start_new_session=True)
        while run.poll() is None and not (book.exists() and book.stat().st_size):
            time.sleep(0.0002)
        if run.poll() is None:
            os.kill(run.pid, signum)
        err = run.communicate(timeout=60)[1]
        if run.returncode != 0:
            break
    assert run.returncode == 128 + signum, err
    n = len(ledger.Ledger(book).records)
    assert err.splitlines()[-1] == (f"pricefold ledger: stopped by SIG{name}; after recording {n} records in {book} "
                                    f"in full (#1–#{n})")
    verified = ledger.Ledger(book)
    assert verified.state == ledger.INTACT and verified.notes == []


@pytest.mark.parametrize("threads", [1, 2])
def test_a_kill_before_anything_is_written_says_nothing_was(results, tmp_path, monkeypatch, capsys, threads):
    """Alone, the main thread raises it at once; beside another thread it is only recorded, and the append checks
    for it under the lock before writing a record (else it wrote them all, then said so)."""
    import threading
    book, done = tmp_path / "L.jsonl", threading.Event()
    if threads == 2:
        threading.Thread(target=done.wait, daemon=True).start()

    def killed(*args, **kwargs):  # SIGTERM while the ledger is being read, before any record is made
        signal.raise_signal(signal.SIGTERM)

    monkeypatch.setattr("fitcore.ledger.reader.Ledger.read_locked", killed)
    try:
        assert main(["ledger", "accept-unflagged", str(results), "--ledger", str(book)]) == 143
    finally:
        done.set()
    assert capsys.readouterr().err.splitlines()[-1] == "pricefold ledger: stopped by SIGTERM; nothing was written"
    assert not book.exists() or book.read_bytes() == b""


def test_export_stopped_after_its_rename_says_it_was_written(results, monkeypatch, capsys):
    book, out = results.with_name("L.jsonl"), results.with_name("plan.csv")
    assert main(["ledger", "accept-unflagged", str(results), "--ledger", str(book), "-q"]) == 0
    from fitcore.outputs.atomic import Staged
    real = Staged.commit

    def renamed_then_killed(self):
        real(self)
        signal.raise_signal(signal.SIGTERM)

    monkeypatch.setattr(Staged, "commit", renamed_then_killed)
    assert main(["ledger", "export", str(book), "--results", str(results), "-o", str(out)]) == 143
    assert capsys.readouterr().err.splitlines()[-1] == (f"pricefold ledger: stopped by SIGTERM; after writing {out} "
                                                         "in full")
    assert out.read_bytes().count(b"\r\n") == 9  # the header and every series


def test_accept_unflagged_into_a_ledger_it_cannot_write_says_only_that(results, monkeypatch, capsys):
    """A trial's accept-unflagged into a read-only ledger said "… accepted as new series (--new-series)" first, then
    "cannot open the ledger for writing"."""
    book = results.with_name("L.jsonl")
    assert main(["ledger", "accept-unflagged", str(results), "--ledger", str(book), "-q"]) == 0
    respelled = results.with_name("c1b.csv")
    respelled.write_text(results.with_name("c1.csv").read_text().replace("item ", "Item "))
    fit(respelled, results.with_name("r1b.json"))
    real = files.open_ledger

    def read_only(path, *, write):
        if write:
            raise ledger.LedgerError(f"{path}: cannot open the ledger for writing (Read-only file system)")
        return real(path, write=write)

    monkeypatch.setattr(files, "open_ledger", read_only)
    before = book.read_bytes()
    assert main(["ledger", "accept-unflagged", str(results.with_name("r1b.json")), "--ledger", str(book),
                 "--new-series"]) == 2
    err = capsys.readouterr().err
    assert err == f"pricefold ledger: {book}: cannot open the ledger for writing (Read-only file system)\n"
    assert book.read_bytes() == before
