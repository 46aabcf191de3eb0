"""``pricefold ledger``: verify, show, export, accept-unflagged (also four at once)."""
from __future__ import annotations

import csv
import json
import subprocess
import sys
from pathlib import Path

import pytest

SAMPLE = Path(__file__).parents[2] / "sample"


def run_cli(*args, env=None):
    import os
    return subprocess.run([sys.executable, "-m", "pricefold", *args], capture_output=True, text=True,
                          env=None if env is None else {**os.environ, **env})


@pytest.fixture(scope="module")
def results(tmp_path_factory):
    path = tmp_path_factory.mktemp("ledger") / "results.json"
    assert run_cli("fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week",
                   "--plan", str(SAMPLE / "plan.csv"), "-o", str(path), "--quiet").returncode == 0
    return path


def unflagged(path):
    return {json.dumps(s["key"], sort_keys=True) for s in json.loads(path.read_text())["series"]
            if not s["flags"] and s["chosen"]}


def test_four_bulk_accepts_at_once_record_each_series_once(tmp_path, results):
    ledger_path = tmp_path / "decisions.jsonl"
    runs = [subprocess.Popen([sys.executable, "-m", "pricefold", "ledger", "accept-unflagged", str(results),
                              "--ledger", str(ledger_path), "--analyst", f"analyst{k}"],
                             stderr=subprocess.PIPE, text=True) for k in range(4)]
    for run in runs:
        assert run.wait(60) == 0, run.stderr.read()
    records = [json.loads(line) for line in ledger_path.read_text().splitlines()]
    keys = [json.dumps(r["series"], sort_keys=True) for r in records]
    assert sorted(keys) == sorted(unflagged(results))  # once each, nothing flagged
    assert [r["seq"] for r in records] == list(range(1, len(records) + 1))
    done = run_cli("ledger", "verify", str(ledger_path))
    assert done.returncode == 0 and f"intact, {len(records)} records" in done.stdout


def test_verify_names_the_broken_line_and_fails(tmp_path, results):
    ledger_path = tmp_path / "decisions.jsonl"
    run_cli("ledger", "accept-unflagged", str(results), "--ledger", str(ledger_path))
    data = ledger_path.read_text().splitlines(keepends=True)
    data[4] = data[4].replace('"accept"', '"hold"')
    ledger_path.write_text("".join(data))
    done = run_cli("ledger", "verify", str(ledger_path))
    assert done.returncode == 1
    assert done.stdout.strip().splitlines()[0].endswith("line 5: record was edited: its digest does not match its content")


def test_keyed_ledger_needs_its_key(tmp_path, results):
    ledger_path = tmp_path / "keyed.jsonl"
    env = {"PRICEFOLD_LEDGER_KEY": "k3y"}
    assert run_cli("ledger", "accept-unflagged", str(results), "--ledger", str(ledger_path), env=env).returncode == 0
    assert run_cli("ledger", "verify", str(ledger_path), env=env).returncode == 0
    assert run_cli("ledger", "verify", str(ledger_path), env={"PRICEFOLD_LEDGER_KEY": "wrong"}).returncode == 1


def test_export_gives_status_model_and_plan_per_series(tmp_path, results):
    ledger_path = tmp_path / "decisions.jsonl"
    run_cli("ledger", "accept-unflagged", str(results), "--ledger", str(ledger_path), "--analyst", "ana")
    out = tmp_path / "decisions.csv"
    done = run_cli("ledger", "export", str(ledger_path), "--results", str(results), "-o", str(out))
    assert done.returncode == 0, done.stderr
    rows = list(csv.DictReader(out.open()))
    assert len(rows) == 180
    accepted = [r for r in rows if r["status"] == "accepted"]
    assert len(accepted) == len(unflagged(results)) and all(r["analyst"] == "ana" for r in accepted)
    assert {r["status"] for r in rows} == {"accepted", "pending"}
    series = {(s["key"]["product"], s["key"]["region"]): s for s in json.loads(results.read_text())["series"]}
    row = accepted[0]
    record = series[(row["product"], row["region"])]
    chosen = next(c for c in record["candidates"] if c["name"] == record["chosen"])
    assert row["model"] == record["chosen"] and json.loads(row["coef"]) == chosen["coef"]
    assert float(row["plan_volume"]) == pytest.approx(record["plan"]["volume"])


def test_show_lists_decisions(tmp_path, results):
    ledger_path = tmp_path / "decisions.jsonl"
    run_cli("ledger", "accept-unflagged", str(results), "--ledger", str(ledger_path), "--analyst", "ana")
    done = run_cli("ledger", "show", str(ledger_path), "--product", "apples 1 kg")
    shown = done.stdout.strip().splitlines()
    assert done.returncode == 0 and 1 <= len(shown) <= 3
    assert all("apples 1 kg" in line and " ana " in line and "accept" in line for line in shown)


def test_ledger_errors_are_one_line(tmp_path):
    done = run_cli("ledger", "verify", str(tmp_path / "missing.jsonl"))
    assert done.returncode == 2 and "missing.jsonl: file not found" in done.stderr and "Traceback" not in done.stderr
