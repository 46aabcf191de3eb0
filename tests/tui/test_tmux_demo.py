"""The installed ``pricefold demo`` in a real terminal (tmux): keys in, screen and ledger out."""
from __future__ import annotations

import json
import shutil
import subprocess
import sys
import time
from pathlib import Path

import pytest

from fitcore.results.read import read_results

TMUX = shutil.which("tmux")
pytestmark = pytest.mark.skipif(TMUX is None, reason="tmux is not installed (.ci/run installs it)")


def wait_for(read, check, seconds=20.0):
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        value = read()
        if check(value):
            return value
        time.sleep(0.05)
    raise AssertionError(f"timed out; last seen:\n{value}")


def test_demo_in_tmux_records_an_accept(tmp_path):
    command = Path(sys.executable).parent / "pricefold"
    socket = tmp_path / "tmux.sock"
    folder = tmp_path / "demo"
    tmux = [TMUX, "-S", str(socket), "-f", "/dev/null"]
    shell = f"TERM=xterm-256color {command} demo --dir {folder} --analyst tmuxer; echo EXITED rc=$?; sleep 30"
    subprocess.run([*tmux, "new-session", "-d", "-x", "80", "-y", "24", shell], check=True)
    try:
        def screen():
            return subprocess.run([*tmux, "capture-pane", "-p"], capture_output=True, text=True).stdout

        first = wait_for(screen, lambda text: "listed (needs a decision" in text and "a accept" in text)
        listed = int(first.split(" listed (needs a decision")[0].split()[-1])
        time.sleep(0.6)  # a decision key right as its series comes up is not done (SETTLE_SECONDS): a person looks
        subprocess.run([*tmux, "send-keys", "a"], check=True)  # stop flags: the screen asks why first
        wait_for(screen, lambda text: "Say why" in text)
        subprocess.run([*tmux, "send-keys", "only two prices seen", "Enter"], check=True)
        ledger = folder / "ledger.jsonl"
        wait_for(lambda: ledger.read_text() if ledger.exists() else "", lambda text: text.count("\n") == 1)
        key = json.loads(ledger.read_text())["series"]
        label = f"{key['product']} · {key['region']}"  # the series the screen opened on
        assert label in next(line for line in first.splitlines() if line.startswith("· ")), first  # listed first
        after = wait_for(screen, lambda text: f"{listed - 1} listed" in text)  # the accepted one leaves the list
        rows = [line.split("▌")[0] for line in after.splitlines() if line.startswith("· ")]  # not the toast
        assert not any(label in row for row in rows), after  # accepted: off the list
        time.sleep(1.6)  # q right after a decision is taken for a note begun where none was asked (README)
        subprocess.run([*tmux, "send-keys", "q"], check=True)
        wait_for(screen, lambda text: "EXITED rc=0" in text)
        [record] = [json.loads(line) for line in ledger.read_text().splitlines()]
        assert record["action"] == "accept" and record["analyst"] == "tmuxer"
        assert record["note"] == "only two prices seen"
        _, series = read_results(folder / "results.parquet")  # the shipped results, placed in the demo's folder
        signed = next(s for s in series if s["key"] == record["series"])
        assert record["flags"] == [f["code"] for f in signed["flags"]] and record["supersedes"] is None
    finally:
        subprocess.run([*tmux, "kill-server"], capture_output=True)
