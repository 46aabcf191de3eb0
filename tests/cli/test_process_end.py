"""The ``pricefold`` process ends without Python's teardown (``pricefold.process_end``), and loses nothing
by it: what was printed is flushed, ``atexit`` functions run, a running non-daemon thread is waited for, a
failed write of the output is an error.  Each check runs a child process, as the installed command does."""
from __future__ import annotations

import subprocess
import sys
from importlib.metadata import entry_points

PRELUDE = "import atexit, sys, threading, time\nfrom pricefold.process_end import end_process\n"


def child(body: str, stdout=subprocess.PIPE) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", PRELUDE + body], stdout=stdout, stderr=subprocess.PIPE,
                          text=True, timeout=60)


def test_printed_text_reaches_the_reader_and_the_status_is_kept():
    done = child("sys.stdout.write('x' * 100_000)\nsys.stderr.write('note')\nend_process(3)")
    assert done.returncode == 3
    assert done.stdout == "x" * 100_000 and done.stderr == "note"


def test_atexit_functions_run(tmp_path):
    mark = tmp_path / "mark"
    done = child(f"atexit.register(lambda: open({str(mark)!r}, 'w').write('ran'))\nend_process(0)")
    assert done.returncode == 0 and mark.read_text() == "ran"


def test_a_running_thread_is_waited_for(tmp_path):
    mark = tmp_path / "mark"
    done = child(f"def late():\n    time.sleep(0.5)\n    open({str(mark)!r}, 'w').write('done')\n"
                 "threading.Thread(target=late).start()\nend_process(4)")
    assert done.returncode == 4 and mark.read_text() == "done"


def test_output_that_cannot_be_written_is_an_error():
    # /dev/full refuses every write (ENOSPC), as a full disk does (Linux); the text waits in the buffer
    # until the end, as a command's last lines to a file do
    done = child("sys.stdout = open('/dev/full', 'w', buffering=65536)\nsys.stdout.write('x' * 10)\n"
                 "end_process(0)")
    assert done.returncode == 120
    assert done.stderr.count("\n") == 1 and "could not be written" in done.stderr


def test_the_installed_command_ends_through_it():
    (script,) = [point for point in entry_points(group="console_scripts") if point.name == "pricefold"]
    assert script.value == "pricefold.cli:entry"


def test_a_full_disk_under_the_output_is_one_line():
    from pathlib import Path
    sample = Path(__file__).resolve().parents[2] / "sample" / "results.parquet"
    with open("/dev/full", "w") as full:
        done = subprocess.run([sys.executable, "-m", "pricefold", "show", str(sample)], stdout=full,
                              stderr=subprocess.PIPE, text=True, timeout=120)
    assert done.returncode == 74  # sysexits' EX_IOERR: not 1, which 'ledger verify' gives a broken ledger
    assert done.stderr == "pricefold show: No space left on device writing the output\n"
