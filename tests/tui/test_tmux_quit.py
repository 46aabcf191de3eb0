"""Keys typed right behind q reach the screen in the same read over SSH ("qa", "qs"): they act on nothing as it
closes.  Before, 'qa' on a series with warn flags only recorded an accept nobody looked at, and 'qs' opened the
sort dialog as the app closed: a traceback and exit 1 after a plain quit."""
from __future__ import annotations

import re
import subprocess
import sys
import time
from pathlib import Path

import pytest

from .test_key_columns_screen import SAMPLE
from .test_tmux_demo import TMUX, wait_for

pytestmark = pytest.mark.skipif(TMUX is None, reason="tmux is not installed (.ci/run installs it)")


@pytest.mark.parametrize("keys", ["qa", "qs"])
def test_keys_behind_q_act_on_nothing(tmp_path, keys):
    command = Path(sys.executable).parent / "pricefold"
    ledger = tmp_path / "ledger.jsonl"
    tmux = [TMUX, "-S", str(tmp_path / "tmux.sock"), "-f", "/dev/null"]
    shell = (f"TERM=xterm-256color {command} triage {SAMPLE / 'results.parquet'} --ledger {ledger} --analyst bo; "
             "echo EXITED rc=$?; sleep 30")
    subprocess.run([*tmux, "new-session", "-d", "-x", "100", "-y", "30", shell], check=True)
    try:
        def screen():
            return subprocess.run([*tmux, "capture-pane", "-p"], capture_output=True, text=True).stdout

        wait_for(screen, lambda text: "listed (needs a decision" in text and "a accept" in text)
        subprocess.run([*tmux, "send-keys", "End"], check=True)  # the last listed: warn flags only, no note asked
        wait_for(screen, lambda text: "· fresh figs 500 g · East" in text)
        time.sleep(0.6)  # past the pause a decision key waits for after its series comes up
        subprocess.run([*tmux, "send-keys", keys], check=True)
        text = wait_for(screen, lambda text: "EXITED" in text)
        assert "EXITED rc=0" in text and "Traceback" not in text, text
        assert not ledger.exists() or ledger.read_text() == ""
    finally:
        subprocess.run([*tmux, "kill-server"], capture_output=True)


def test_ctrl_z_puts_the_screen_in_the_background_and_fg_brings_it_back(tmp_path):
    """Ctrl+Z in a shell puts a command in the background; the screen took the key and did nothing, said nothing (a
    trial over SSH).  Now the shell's job control takes it (``Stopped``), ``fg`` gives the screen back, keys work."""
    command = Path(sys.executable).parent / "pricefold"
    ledger = tmp_path / "ledger.jsonl"
    tmux = [TMUX, "-S", str(tmp_path / "tmux.sock"), "-f", "/dev/null"]
    subprocess.run([*tmux, "new-session", "-d", "-x", "100", "-y", "30", "bash --norc --noprofile"], check=True)
    try:
        def screen():
            return subprocess.run([*tmux, "capture-pane", "-p"], capture_output=True, text=True).stdout

        # one job (a shell around the screen): stopped and continued whole, its echo after the screen's end
        subprocess.run([*tmux, "send-keys", f"bash -c 'TERM=xterm-256color {command} triage "
                        f"{SAMPLE / 'results.parquet'} --ledger {ledger} --analyst bo; echo EXITED rc=$?'", "Enter"],
                       check=True)
        wait_for(screen, lambda text: "listed (needs a decision" in text and "a accept" in text)
        subprocess.run([*tmux, "send-keys", "C-z"], check=True)
        wait_for(screen, lambda text: "Stopped" in text and "listed (needs a decision" not in text)
        subprocess.run([*tmux, "send-keys", "fg", "Enter"], check=True)
        wait_for(screen, lambda text: "listed (needs a decision" in text and "a accept" in text)
        time.sleep(0.6)  # past the pause a key waits for after the screen comes back
        subprocess.run([*tmux, "send-keys", "q"], check=True)
        text = wait_for(screen, lambda text: re.search(r"EXITED rc=\d", text))  # (the command line holds "rc=$?")
        assert "EXITED rc=0" in text and "Traceback" not in text, text
    finally:
        subprocess.run([*tmux, "kill-server"], capture_output=True)
