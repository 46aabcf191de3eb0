"""A triage opened on a results file refits the data it names exactly as the file says."""
from __future__ import annotations

import json
import shutil
from pathlib import Path

import numpy as np
import pytest

from pricefold.cli import main
from tests.tui.conftest import ANA
from tui.factory import open_session, source_from_results

SAMPLE = Path(__file__).parents[2] / "sample"


@pytest.fixture
def fitted(tmp_path):
    data = tmp_path / "wholesale.csv"
    shutil.copy(SAMPLE / "wholesale.csv", data)
    out = tmp_path / "results.json"
    assert main(["fit", str(data), "--segment", "region", "--date", "week", "--plan", str(SAMPLE / "plan.csv"),
                 "--seed", "3", "--threshold", "min_points=20", "-o", str(out), "--quiet"]) == 0
    return data, out


def test_session_from_results_reproduces_the_file(fitted, tmp_path):
    _, out = fitted
    session = open_session(source_from_results(out), tmp_path / "l.jsonl", ANA)
    assert session.warnings == []
    records = json.loads(out.read_text())["series"]
    results = session.results
    assert results.settings.seed == 3 and session.diagnosis.thresholds.min_points == 20
    for s, record in enumerate(records):
        assert results.data.key_of(s) == record["key"]
        assert (results.names[results.chosen[s]] if results.chosen[s] >= 0 else None) == record["chosen"]
        assert [f["code"] for f in session.diagnosis.flags_of(s)] == [f["code"] for f in record["flags"]]
        assert results.data.fingerprints[s] == record["fingerprint"]
        for c, cand in enumerate(record["candidates"]):
            if cand["available"]:
                np.testing.assert_allclose(results.cv_mse[s, c], cand["cv_mse"], rtol=1e-12)


def test_changed_data_is_said_and_decisions_become_stale(fitted, tmp_path):
    data, out = fitted
    ledger_path = tmp_path / "l.jsonl"
    session = open_session(source_from_results(out), ledger_path, ANA)
    s = int(np.flatnonzero(~session.needs_attention())[0])
    session.decide(session.look(s), "accept", note="checked")
    assert session.status[s] == "accepted"
    lines = data.read_text().splitlines()
    key = session.results.data.key_of(s)
    row = next(i for i, line in enumerate(lines) if line.startswith(f"{key['product']},{key['region']},"))
    parts = lines[row].split(",")
    parts[4] = str(int(parts[4]) + 1)  # one week's volume changes
    lines[row] = ",".join(parts)
    data.write_text("\n".join(lines) + "\n")
    again = open_session(source_from_results(out), ledger_path, ANA)
    assert again.warnings and "changed since results.json was written" in again.warnings[0]
    assert again.status[s] == "stale" and again.diagnosis.flagged("stale")[s]
    assert "stale" in [f["code"] for f in again.diagnosis.flags_of(s)]
