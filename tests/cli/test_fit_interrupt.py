"""Ctrl+C and kill -9 during ``pricefold fit --ledger``, which reads the ledger in a forked child.

A terminal's Ctrl+C reaches every process of its group, the child too: the command must still end with its one
line and exit 130, never a traceback (the child's included), never results written after the interrupt, and the
earlier results byte for byte as they were.  A parent killed with -9 must not leave the child behind.
"""
from __future__ import annotations

import hashlib
import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from pricefold import interrupts
from pricefold.cli import main

SAMPLE = Path(__file__).resolve().parents[2] / "sample"
LINE = "pricefold fit: interrupted; nothing was written\n"


@pytest.fixture(scope="module")
def signed(tmp_path_factory):
    """The sample fitted, its unflagged series accepted into a ledger, and earlier results of the run to
    interrupt."""
    folder = tmp_path_factory.mktemp("interrupt")
    assert main(["fit", str(SAMPLE / "wholesale.csv"), *ARGS, "-o", str(folder / "r1.parquet"), "-q"]) == 0
    assert main(["ledger", "accept-unflagged", str(folder / "r1.parquet"), "--ledger",
                 str(folder / "L.jsonl"), "-q"]) == 0
    assert main(["fit", str(SAMPLE / "wholesale.csv"), *ARGS, "-o", str(folder / "p2.parquet"), "-q"]) == 0
    return folder


ARGS = ["--segment", "region", "--date", "week", "--plan", str(SAMPLE / "plan.csv")]


def start(folder: Path, said=subprocess.PIPE, launch=None) -> subprocess.Popen:
    """``fit --ledger`` in a session of its own (as a terminal's job: one process group for the command and
    its child)."""
    return subprocess.Popen([sys.executable, "-m", "pricefold", "fit", str(SAMPLE / "wholesale.csv"), *ARGS,
                             "-o", "p2.parquet", "--ledger", "L.jsonl"], cwd=folder, stdout=said, stderr=said,
                            start_new_session=True, preexec_fn=launch or interruptible)


def interruptible() -> None:
    """A terminal's job takes Ctrl+C even where pytest itself was started with SIGINT ignored (``cmd &`` in a
    non-interactive shell), which the child would inherit and keep."""
    signal.signal(signal.SIGINT, signal.SIG_DFL)


def children(pid: int) -> list[int]:
    found = []
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                stat = Path(f"/proc/{entry}/stat").read_text()
            except OSError:
                continue
            if int(stat.rsplit(")", 1)[1].split()[1]) == pid:
                found.append(int(entry))
    return found


def alive(pid: int) -> bool:
    try:
        return Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0] != "Z"
    except OSError:
        return False


def forked(run: subprocess.Popen, within: float = 30.0) -> int:
    """The ledger reader's pid, once the command has forked it."""
    deadline = time.monotonic() + within
    while time.monotonic() < deadline:
        found = children(run.pid)
        if found:
            return found[0]
        assert run.poll() is None, "the command ended before it forked"
        time.sleep(0.01)
    raise AssertionError("the ledger reader was never forked")


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_a_killed_fit_takes_its_ledger_reader_with_it(signed):
    """Before: the child, blocked writing the ledger's state to a pipe nobody would read, stayed for ever."""
    run = start(signed, subprocess.DEVNULL)  # no pipes: a child left behind would hold them open
    child = forked(run)
    time.sleep(0.3)  # the parent loads and fits; the child reads and waits to hand over
    os.kill(run.pid, signal.SIGKILL)
    run.wait()
    deadline = time.monotonic() + 5
    while alive(child) and time.monotonic() < deadline:
        time.sleep(0.02)
    still = alive(child)
    if still:
        os.kill(child, signal.SIGKILL)
    assert not still


def interrupted(folder: Path, after: float) -> tuple[int, str] | None:
    """(exit status, stderr) of a run sent Ctrl+C (SIGINT to its whole group) ``after`` seconds past the
    fork; None when it had finished by then."""
    run = start(folder)
    forked(run)
    time.sleep(after)
    if run.poll() is not None:
        run.communicate()
        return None
    os.killpg(run.pid, signal.SIGINT)
    _, err = run.communicate(timeout=60)
    return run.returncode, err.decode()


def test_ctrl_c_while_the_ledger_is_read_is_one_line_and_exit_130(signed):
    """Before: the child's traceback ('Process ForkProcess-1: … pipe.send(said) … KeyboardInterrupt')."""
    earlier = digest(signed / "p2.parquet")
    assert interrupted(signed, 0.35) == (130, LINE)
    assert digest(signed / "p2.parquet") == earlier
    assert not [p.name for p in signed.iterdir() if p.name.endswith(".tmp")]


def sigint_ignored() -> None:
    """As ``cmd &`` in a non-interactive shell starts a job: SIGINT ignored."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)


@pytest.mark.parametrize("name", ["SIGTERM", "SIGHUP"])
@pytest.mark.parametrize("launch", [interruptible, sigint_ignored])
def test_a_kill_or_a_closed_terminal_stops_the_run_as_ctrl_c_does(signed, name, launch):
    """Before: ``kill`` (SIGTERM) or a closed SSH session (SIGHUP) ended the process at once, exit 143 or 129 with
    no line, and its staged files (``.p2.parquet.pricefold-….tmp``) stayed until a later run to that name."""
    earlier = digest(signed / "p2.parquet")
    number = getattr(signal, name)
    run = start(signed, launch=launch)
    forked(run)
    time.sleep(0.35)
    assert run.poll() is None, "the run ended before the signal"
    os.kill(run.pid, number)  # the command alone, as ``kill PID`` does
    _, err = run.communicate(timeout=60)
    assert (run.returncode, err.decode()) == (128 + number, f"pricefold fit: stopped by {name}; nothing was written\n")
    assert digest(signed / "p2.parquet") == earlier
    assert not [p.name for p in signed.iterdir() if p.name.endswith(".tmp")]


@pytest.mark.slow  # about twenty whole runs (~40 s)
def test_ctrl_c_at_any_moment_is_one_line_exit_130_and_nothing_written(signed):
    """Before: a traceback from the child at every moment, and at some (an interrupt raised while pyarrow
    imported pandas, which the warm-up thread was importing too) the results written after it, exit 0; with
    the interrupt raised while another thread ran, the command could also hang for ever."""
    run = start(signed)
    forked(run)
    started = time.monotonic()
    run.communicate()
    whole = time.monotonic() - started
    earlier = digest(signed / "p2.parquet")  # that run rewrote it
    seen = []
    for share in [i / 20 for i in range(18)]:
        said = interrupted(signed, whole * share)
        if said is not None:
            seen.append(said)
            if said[1].endswith(" in full\n"):  # came once the results were in place: said so, as they are
                assert said[0] == 130 and said[1].splitlines()[-1] == (
                    "pricefold fit: interrupted; after writing p2.parquet in full"), share
                earlier = digest(signed / "p2.parquet")
                continue
            assert said == (130, LINE), share
            assert digest(signed / "p2.parquet") == earlier
    assert len(seen) >= 10
    assert not [p.name for p in signed.iterdir() if p.name.endswith(".tmp")]


def test_an_interrupt_swallowed_while_another_thread_runs_is_raised_at_the_next_check():
    """A library that catches the interrupt cannot make the fit carry on: ``check`` raises it."""
    # pytest started with SIGINT ignored (``cmd &``) would leave ``noticed`` nothing to take over
    before = signal.signal(signal.SIGINT, signal.default_int_handler)
    stop = threading.Event()
    other = threading.Thread(target=stop.wait)
    other.start()
    try:
        with pytest.raises(KeyboardInterrupt):
            with interrupts.noticed():
                try:
                    os.kill(os.getpid(), signal.SIGINT)
                    time.sleep(0.05)  # the handler runs here; with another thread alive it only records
                except KeyboardInterrupt:  # what a swallowing library does
                    pass
                interrupts.check()
    finally:
        stop.set()
        other.join()
        signal.signal(signal.SIGINT, before)
    interrupts.check()  # outside the block: nothing recorded


def test_ctrl_c_before_the_command_starts_ends_with_one_line_and_130():
    """Ctrl+C while the parser's modules load (the first ~0.3 s of any command) went past ``main``'s handler:
    a traceback from numpy or ``re`` and death by signal.  Here the interrupt is raised where the parser is
    built, as a real one lands there."""
    code = ("import sys, pricefold.cli as cli\n"
            "def interrupted(): raise KeyboardInterrupt\n"
            "cli.build_parser = interrupted\n"
            "sys.argv = ['pricefold', 'fit', 'x.csv', '-o', 'y.json']\n"
            "cli.entry()\n")
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert (run.returncode, run.stderr) == (130, "pricefold: interrupted; nothing was written\n")


def test_ctrl_c_as_the_files_are_put_in_place_lands_after_both_and_says_so(tmp_path):
    """Before: a Ctrl+C between the rejects file's rename and the results' left the new rejects beside the
    earlier results, and the line said "nothing was written"."""
    lines = (SAMPLE / "wholesale.csv").read_text().splitlines()
    (tmp_path / "d.csv").write_text("\n".join([*lines[:300], "apples 1 kg,North,2030-01-07,cheap,5,0",
                                               *lines[300:]]) + "\n")
    assert main(["fit", str(tmp_path / "d.csv"), "--segment", "region", "-o", str(tmp_path / "r.json"), "-q"]) == 0
    earlier = (tmp_path / "r.json").read_bytes()
    code = ("import os, signal, sys\n"
            "signal.signal(signal.SIGINT, signal.default_int_handler)\n"
            "import fitcore.outputs.atomic as atomic\n"
            "replace = os.replace\n"
            "def replace_then_interrupt(src, dst):\n"
            "    replace(src, dst)\n"
            "    if str(dst).endswith('rejects.csv'): os.kill(os.getpid(), signal.SIGINT)\n"
            "atomic.os.replace = replace_then_interrupt\n"
            "from pricefold.cli import entry\n"
            "sys.argv = ['pricefold', 'fit', 'd.csv', '--segment', 'region', '--seed', '1', '-o', 'r.json', '-q']\n"
            "entry()\n")
    run = subprocess.run([sys.executable, "-c", code], cwd=tmp_path, capture_output=True, text=True, timeout=120)
    assert run.returncode == 130, run.stderr
    assert run.stderr.endswith("pricefold fit: interrupted; after writing r.rejects.csv, r.json in full\n")
    import json
    source = json.loads((tmp_path / "r.json").read_text())["input"]
    assert source["rejects_sha256"] == digest(tmp_path / "r.rejects.csv")  # the pair from one run
    assert (tmp_path / "r.json").read_bytes() != earlier  # the second run's (its seed)


def test_a_signal_after_the_files_are_in_place_is_said_at_the_end(monkeypatch, capsys):
    """Before: a kill in the moment between a fit's files being in place and the process's end killed it by the
    signal (exit 143, no line) though the new results were complete.  Now it is recorded and said at the end."""
    if signal.getsignal(signal.SIGTERM) is not signal.SIG_DFL:
        pytest.skip("SIGTERM is not at its default action here")
    with pytest.raises(interrupts.Stopped) as caught:
        with interrupts.noticed():
            interrupts.in_place(["r.rejects.csv", "r.json"])
            os.kill(os.getpid(), signal.SIGTERM)
            time.sleep(0.05)  # the handler runs here: recorded, not raised, the files being in place
            interrupts.check()
    assert caught.value.signum == signal.SIGTERM and caught.value.written == ["r.rejects.csv", "r.json"]
    assert signal.getsignal(signal.SIGTERM) is signal.SIG_DFL  # put back
    import pricefold.cli as cli
    monkeypatch.setitem(cli.COMMANDS, "fit", lambda args: (_ for _ in ()).throw(caught.value))
    assert cli.main(["fit", "d.csv", "-o", "r.json"]) == 143
    assert capsys.readouterr().err == "pricefold fit: stopped by SIGTERM; after writing r.rejects.csv, r.json in full\n"


def test_after_the_run_a_signal_is_recorded_until_the_process_ends(monkeypatch):
    """The installed command (``cli.entry``) keeps recording once a fit's files are in place and its block ended
    (waiting for threads, exit functions): a kill there was a silent exit 143; ``entry`` now says it.  Called in
    process (``main``), the handlers are put back as before."""
    if signal.getsignal(signal.SIGTERM) is not signal.SIG_DFL:
        pytest.skip("SIGTERM is not at its default action here")
    with interrupts.noticed():  # in process: nothing kept
        interrupts.in_place(["r.json"])
    assert signal.getsignal(signal.SIGTERM) is signal.SIG_DFL
    monkeypatch.setattr(interrupts, "_until_exit", True)
    try:
        with interrupts.noticed():
            interrupts.in_place(["r.rejects.csv", "r.json"])
        assert signal.getsignal(signal.SIGTERM) is interrupts._after
        os.kill(os.getpid(), signal.SIGTERM)
        time.sleep(0.05)
        assert interrupts.late() == (signal.SIGTERM, ["r.rejects.csv", "r.json"], [])
    finally:
        for name in interrupts.NOTICED:
            number = getattr(signal, name)
            signal.signal(number, signal.default_int_handler if number == signal.SIGINT else signal.SIG_DFL)
        interrupts._late.clear()
