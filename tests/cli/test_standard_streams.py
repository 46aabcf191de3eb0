"""Standard streams as the shell may leave them (``pricefold.streams``, ``pricefold.terminal``), each command run as
its own process: closed standard output is a failed write (one line, exit 74), closed standard error leaves the
command working, a non-UTF-8 locale's missing characters are escaped, and the screen's standard error is put on
the terminal while it is drawn.  Trials found a traceback and exit 1 (verify's code for a broken chain), a silent
exit 0 with nothing shown, a fit exiting 1 without a word, and a screen drawn into a file while its keys recorded
decisions."""
from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

SAMPLE = Path(__file__).resolve().parents[2] / "sample"


def run(args, close=(), env=None, **kw):
    def closing():
        for fd in close:
            os.close(fd)
    return subprocess.run([sys.executable, "-m", "pricefold", *map(str, args)], preexec_fn=closing,
                          capture_output=not close, text=True, env={**os.environ, **(env or {})}, **kw)


def test_closed_standard_output_is_a_failed_write_said_in_one_line(tmp_path):
    book = tmp_path / "L.jsonl"
    assert run(["ledger", "accept-unflagged", SAMPLE / "results.parquet", "--ledger", book, "-q"]).returncode == 0
    for args in (["ledger", "verify", book], ["show", SAMPLE / "results.parquet"], ["ledger", "show", book],
                 # its rows written to the descriptor, the null device standing in for the closed one (a trial: exit
                 # 0 and "180 series written to standard output")
                 ["ledger", "export", book, "--results", SAMPLE / "results.parquet", "-o", "-", "-q"]):
        err = tmp_path / "err.txt"
        with open(err, "w") as handle:
            done = subprocess.run([sys.executable, "-m", "pricefold", *map(str, args)], stderr=handle,
                                  preexec_fn=lambda: os.close(1))
        said = err.read_text()
        assert done.returncode == 74 and said.count("\n") == 1, (args, said)
        assert said.endswith(": standard output is closed (>&-): there is nowhere to write the output\n"), said


def test_closed_standard_error_leaves_a_fit_working_and_its_files_whole(tmp_path):
    out = tmp_path / "r.json"
    done = subprocess.run([sys.executable, "-m", "pricefold", "fit", str(SAMPLE / "wholesale.csv"), "-o", str(out)],
                          stdout=subprocess.DEVNULL, preexec_fn=lambda: os.close(2))
    assert done.returncode == 0 and out.read_text().startswith("{")
    # with standard output closed too, a file the fit opens never takes descriptor 1 (a stray write there)
    done = subprocess.run([sys.executable, "-m", "pricefold", "fit", str(SAMPLE / "wholesale.csv"), "-o",
                           str(tmp_path / "r2.json")], preexec_fn=lambda: (os.close(1), os.close(2)))
    assert done.returncode == 0 and (tmp_path / "r2.json").read_text() == out.read_text()


def test_a_locale_without_the_separator_gets_it_escaped(tmp_path):
    done = run(["show", SAMPLE / "results.parquet", "--product", "lemons 500 g"],
               env={"PYTHONUTF8": "0", "LC_ALL": "C", "LANG": "C", "PYTHONIOENCODING": "ascii"})
    assert done.returncode == 0, done.stderr
    assert "lemons 500 g \\xb7 North" in done.stdout


def test_the_screens_standard_error_is_the_terminal_while_it_is_drawn(tmp_path):
    """A pseudo-terminal for standard output, standard error a file: inside, descriptor 2 and ``sys.__stderr__``
    reach the terminal; after, the file again, holding only what was said outside."""
    import pty
    script = (
        "import os, sys\n"
        "from pricefold.terminal import drawn_on_the_terminal\n"
        "print('before', file=sys.stderr, flush=True)\n"
        "with drawn_on_the_terminal():\n"
        "    assert os.isatty(2) and sys.__stderr__.fileno() == 2\n"
        "    sys.__stderr__.write('on the screen'); sys.__stderr__.flush()\n"
        "print('after', file=sys.stderr, flush=True)\n")
    leader, follower = pty.openpty()
    err = tmp_path / "err.txt"
    with open(err, "w") as handle:
        done = subprocess.run([sys.executable, "-c", script], stdout=follower, stderr=handle, timeout=60)
    os.close(follower)
    seen = os.read(leader, 4096).decode()
    os.close(leader)
    assert done.returncode == 0 and err.read_text() == "before\nafter\n" and "on the screen" in seen
