"""``kill -9`` at each step of ``pricefold fit`` putting its files in place (the rejects file, the results, the
replaced results' own rejects file removed): the next run finds the earlier pair exactly as it was or the new pair
complete and consistent, no temporary file or journal left, and is not refused.  Once the journal is on disk the
step is decided: the next run finishes it (the killed run's pair, whole).

The fit is the installed entry point run by ``stop_at.py``, which stops the process (SIGSTOP) at one rename or
removal; the test then kills it there, as an OOM kill or a power cut would."""
from __future__ import annotations

import hashlib
import json
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

STOP_AT = Path(__file__).with_name("stop_at.py")


def sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture
def folder(tmp_path):
    rng = np.random.default_rng(3)
    n = 3000
    rows = [f"p{i % 150},{p:.2f},{v:.1f}" for i, (p, v) in enumerate(zip(rng.uniform(1, 3, n), rng.uniform(10, 90, n)))]
    for name, bad in (("a.csv", ["p1,-1,2"]), ("b.csv", ["p2,x,3", "p3,2,-4"]), ("clean.csv", [])):
        (tmp_path / name).write_text("\n".join(["product,price,volume", *rows, *bad]) + "\n")
    return tmp_path


def pricefold(folder: Path, *args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "pricefold", *args], cwd=folder, capture_output=True, text=True,
                          timeout=120)


def fit(folder: Path, data: str, out: str, *more: str) -> subprocess.CompletedProcess:
    return pricefold(folder, "fit", data, "-o", out, "-q", *more)


def stopped(folder: Path, at: str, data: str, out: str) -> subprocess.Popen:
    """A fit stopped at ``at`` (``stop_at.py``), still alive."""
    # Ctrl+C's usual handling, whatever this process was started with: a runner started in the background by a
    # shell without job control ignores SIGINT, its children too, and pricefold then keeps ignoring it (README)
    run = subprocess.Popen([sys.executable, str(STOP_AT), at, "fit", data, "-o", out, "-q"], cwd=folder,
                           stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True,
                           preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL))
    until = time.monotonic() + 120
    while time.monotonic() < until:
        state = Path(f"/proc/{run.pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
        if state == "T":
            return run
        assert run.poll() is None, f"ended without stopping at {at}: {run.stderr.read()}"
        time.sleep(0.01)
    raise AssertionError(f"never stopped at {at}")


def killed(folder: Path, at: str, data: str, out: str) -> None:
    run = stopped(folder, at, data, out)
    run.kill()  # SIGKILL
    assert run.wait() == -signal.SIGKILL


def pair(folder: Path, out: str) -> tuple[str, str | None]:
    """(the data the results were fitted from, their rejects file's digest if it is the one they record) — the
    assertion fails where the results record a rejects file other than the one beside them."""
    results = folder / out
    document = json.loads(results.read_text())
    rejects = results.with_name(results.stem + ".rejects.csv")
    recorded = document["input"]["rejects_sha256"]
    assert (sha(rejects) if rejects.exists() else None) == recorded, f"{out} and {rejects.name} do not belong together"
    return Path(document["input"]["path"]).name, recorded


def left_over(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith((".tmp", ".journal")))


SLOW = pytest.mark.slow  # each step ~5 s (four or five whole processes): one step of each kind runs by default


@pytest.mark.parametrize("at", [pytest.param("before:replace:r.rejects.csv", marks=SLOW), "before:replace:r.json",
                                pytest.param("before:unlink:*.journal", marks=SLOW)])
def test_a_fit_killed_putting_a_new_pair_in_place_is_finished_by_the_next(folder, at, monkeypatch):
    assert fit(folder, "a.csv", "r.json").returncode == 0
    killed(folder, at, "b.csv", "r.json")
    shown = pricefold(folder, "show", "r.json")  # a reader says so, and changes nothing
    assert "a fit was killed while putting its files in place" in shown.stderr
    screen = {}  # the screen says it too: what is printed before it opens is hidden once it has
    monkeypatch.setattr("pricefold.terminal.require_terminal", lambda what: None, raising=False)
    monkeypatch.setattr("pricefold.triage_cli.open_triage", lambda source, *a, **kw: screen.update(w=source.warnings))
    monkeypatch.chdir(folder)
    from pricefold.cli import main
    main(["triage", "r.json", "--ledger", "L.jsonl"])
    assert any("a fit was killed while putting its files in place" in line for line in screen["w"]), screen
    refused = fit(folder, "a.csv", "r.json", "--strict")  # writes nothing of its own: what is left is the finish
    assert refused.returncode == 2 and "put in place what a fit killed" in refused.stderr, refused.stderr
    assert pair(folder, "r.json")[0] == "b.csv" and left_over(folder) == []  # the killed run's pair, whole
    again = fit(folder, "a.csv", "r.json")  # not refused, and the pair it leaves is its own
    assert again.returncode == 0, again.stderr
    assert pair(folder, "r.json")[0] == "a.csv" and left_over(folder) == []


@pytest.mark.parametrize("at", [pytest.param("before:replace:q.json", marks=SLOW), "before:unlink:q.rejects.csv",
                                pytest.param("before:unlink:*.journal", marks=SLOW)])
def test_a_clean_fit_killed_in_place_removes_the_replaced_rejects_file_all_the_same(folder, at):
    assert fit(folder, "a.csv", "q.json").returncode == 0
    killed(folder, at, "clean.csv", "q.json")
    refused = fit(folder, "a.csv", "q.json", "--strict")
    assert refused.returncode == 2, refused.stderr
    assert pair(folder, "q.json") == ("clean.csv", None) and left_over(folder) == []
    again = fit(folder, "b.csv", "q.json")
    assert again.returncode == 0, again.stderr
    assert pair(folder, "q.json")[0] == "b.csv" and left_over(folder) == []


@pytest.mark.parametrize("signum", [signal.SIGTERM, signal.SIGINT])
def test_a_signal_right_after_the_clean_runs_rename_still_removes_the_replaced_rejects(folder, signum):
    assert fit(folder, "a.csv", "q.json").returncode == 0
    run = stopped(folder, "after:replace:q.json", "clean.csv", "q.json")
    run.send_signal(signum)
    run.send_signal(signal.SIGCONT)
    assert run.wait(60) == 128 + signum
    assert "after writing q.json in full" in run.stderr.read()
    assert pair(folder, "q.json") == ("clean.csv", None) and left_over(folder) == []
    assert not (folder / "q.rejects.csv").exists()


def test_a_half_done_step_whose_new_copy_is_gone_is_said_and_the_next_run_goes_on(folder):
    assert fit(folder, "a.csv", "r.json").returncode == 0
    earlier = sha(folder / "r.json")
    killed(folder, "before:replace:r.json", "b.csv", "r.json")
    for temp in folder.glob(".r.json.*.tmp"):
        temp.unlink()  # removed by hand
    refused = fit(folder, "a.csv", "r.json", "--strict")
    said = [line for line in refused.stderr.splitlines() if "cannot be finished" in line]
    assert len(said) == 1 and "the new copy of r.json is gone; removed the new r.rejects.csv" in said[0], refused.stderr
    assert sha(folder / "r.json") == earlier and not (folder / "r.rejects.csv").exists() and left_over(folder) == []
    again = fit(folder, "b.csv", "r.json")
    assert again.returncode == 0, again.stderr
    assert pair(folder, "r.json")[0] == "b.csv" and left_over(folder) == []


def test_a_folder_moved_during_the_fit_keeps_no_temporary_file(folder):
    (folder / "out").mkdir()
    run = stopped(folder, "before:replace:m.json", "clean.csv", "out/m.json")
    (folder / "out").rename(folder / "moved")
    run.send_signal(signal.SIGCONT)
    assert run.wait(60) == 2
    assert "its folder out was moved or removed while it was written; nothing was put there" in run.stderr.read()
    assert list((folder / "moved").iterdir()) == []


def test_a_copy_of_the_folder_made_after_the_kill_is_finished_as_the_folder_would_be(folder, tmp_path_factory):
    """``cp -a`` of the folder (a backup restored, a move to another disk) between the kill and the next run: every
    inode changes.  Before, the rejects file already renamed read as "gone", the killed run's whole results were
    deleted and the line said "the earlier files are as they were" beside the new rejects file."""
    assert fit(folder, "a.csv", "r.json").returncode == 0
    killed(folder, "before:replace:r.json", "b.csv", "r.json")  # its rejects file in place, its results not yet
    copy = tmp_path_factory.mktemp("restored") / "copy"
    subprocess.run(["cp", "-a", str(folder), str(copy)], check=True)
    finished = fit(copy, "a.csv", "r.json", "--strict")  # writes nothing of its own: what is left is the finish
    assert "put in place what a fit killed" in finished.stderr, finished.stderr
    assert pair(copy, "r.json")[0] == "b.csv" and left_over(copy) == []  # the killed run's pair, whole
