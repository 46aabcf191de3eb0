"""A killed ``pricefold fit`` leaves the earlier results and rejects file as they were, and the next run
removes the temporary files it left."""
from __future__ import annotations

import hashlib
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def fit(folder: Path, data: str, out: str = "r.json") -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-m", "pricefold", "fit", data, "-o", out, "--quiet"], cwd=folder,
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)


@pytest.mark.slow  # five whole processes (~20 s)
def test_killed_runs_keep_the_earlier_pair_and_the_next_run_cleans_up(tmp_path):
    rng = np.random.default_rng(0)
    n = 120_000
    lines = ["product,price,volume"] + [f"p{i % 20000},{p:.2f},{v:.1f}" for i, (p, v) in
                                       enumerate(zip(rng.uniform(1, 3, n), rng.uniform(10, 90, n)))]
    (tmp_path / "old.csv").write_text("\n".join(lines[:2000] + ["p1,-1,2"]) + "\n")
    (tmp_path / "new.csv").write_text("\n".join(lines + ["p2,x,3"]) + "\n")
    assert fit(tmp_path, "old.csv").wait(120) == 0
    earlier = {name: digest(tmp_path / name) for name in ("r.json", "r.rejects.csv")}
    assert json.loads((tmp_path / "r.json").read_text())["input"]["rejects_sha256"] == earlier["r.rejects.csv"]
    started = time.perf_counter()
    assert fit(tmp_path, "new.csv", "m.json").wait(300) == 0  # how long a whole run takes here
    whole = time.perf_counter() - started
    killed = 0
    for share in (0.3, 0.5, 0.7):
        run = fit(tmp_path, "new.csv")
        time.sleep(whole * share)
        if run.poll() is None:
            os.kill(run.pid, signal.SIGKILL)
            run.wait()
            killed += 1
            assert {name: digest(tmp_path / name) for name in earlier} == earlier
    assert killed >= 2
    assert fit(tmp_path, "old.csv").wait(120) == 0
    assert not [p.name for p in tmp_path.iterdir() if p.name.endswith(".tmp")]
