"""A sign-off to report: the invented sample plus three series with hostile names, fitted, then decided.

Decisions: a bulk accept of every unflagged series, and one by one an override (with a note
holding markup), a hold, a note, and an accept past a stop flag — by two analysts.
"""
from __future__ import annotations

import csv
import json
import subprocess
import sys
from datetime import datetime, timedelta, timezone
from pathlib import Path

from fitcore import ledger
from fitcore.ledger.replay import replay, series_id

SAMPLE = Path(__file__).parents[2] / "sample"
HOSTILE = ("<script>alert(1)</script>", "[/] [bold]x", "\x1b[2J\x1b]2;owned\x07 wipe")
NOTE = "price test <b>bold</b> & \"quoted\"; see <img src=x onerror=alert(2)>"


def hostile_data(folder: Path) -> tuple[Path, Path]:
    """The sample with the rows of 'apples 1 kg · North' copied under each hostile product name."""
    rows = list(csv.reader((SAMPLE / "wholesale.csv").open(encoding="utf-8")))
    plan = list(csv.reader((SAMPLE / "plan.csv").open(encoding="utf-8")))
    extra = [r for r in rows[1:] if r[0] == "apples 1 kg" and r[1] == "North"]
    for name in HOSTILE:
        rows += [[name, *r[1:]] for r in extra]
        plan.append([name, "North", "2.20", *[""] * (len(plan[0]) - 3)])  # empty control cells: the defaults
    data, plan_file = folder / "data.csv", folder / "plan.csv"
    for path, table in ((data, rows), (plan_file, plan)):
        with path.open("w", encoding="utf-8", newline="") as handle:
            csv.writer(handle).writerows(table)
    return data, plan_file


def fit(data: Path, plan: Path, output: Path) -> None:
    done = subprocess.run([sys.executable, "-m", "pricefold", "fit", str(data), "--segment", "region", "--date",
                           "week", "--plan", str(plan), "-o", str(output), "--quiet"], capture_output=True, text=True)
    assert done.returncode == 0, done.stderr


def clock(start: datetime):
    moments = iter(start + timedelta(milliseconds=k) for k in range(10**6))
    return lambda: next(moments)


def decide(results_path: Path, ledger_path: Path, key: bytes | None = None) -> dict:
    """Record the scenario's decisions; returns the keys of the series decided one by one, by action."""
    from fitcore.results.read import read_results
    header, series = read_results(results_path)
    digest = ledger.results_digest(header)
    by_key = {(s["key"]["product"], s["key"]["region"]): s for s in series}
    ana = ledger.Identity("ana", "ana", "test-host")
    ben = ledger.Identity("ben <i>", "ben", "test-host")
    day = datetime(2026, 12, 1, 9, 0, tzinfo=timezone.utc)

    book = ledger.Ledger(ledger_path, key)

    def entry(key, action, model=None, note=""):  # as a screen would: naming the flags and the record it saw
        s = by_key[key]
        seen = book.histories.get(series_id(s["key"]))
        return ledger.Entry(series=s["key"], action=action, fingerprint=s["fingerprint"], results=digest,
                            model=model or s["chosen"], proposed=s["chosen"], note=note,
                            supersedes=seen.latest["digest"] if seen else None,
                            flags=[f["code"] for f in s["flags"]])

    def unflagged(records):
        decided = replay(records)
        return [entry((s["key"]["product"], s["key"]["region"]), "accept") for s in series
                if not s["flags"] and s["chosen"] and series_id(s["key"]) not in decided]

    book.append(unflagged, ana, now=clock(day))
    override = (HOSTILE[0], "North")
    other = next(c["name"] for c in by_key[override]["candidates"]
                 if c["available"] and c["name"] != by_key[override]["chosen"])
    rising = next((s["key"]["product"], s["key"]["region"]) for s in series  # accepted past its stop flag
                  if "rising" in {f["code"] for f in s["flags"]} and s["chosen"])
    one_by_one = {
        "override": [override], "hold": [("lemons 500 g", "East")],
        "note": [("grapes 500 g", "East"), (HOSTILE[1], "North"), (HOSTILE[2], "North")],
        "accept": [rising]}
    book.append([entry(override, "override", other, NOTE)], ben, now=clock(day + timedelta(hours=2)))
    book.append([entry(("lemons 500 g", "East"), "hold", note="ask the buyer")], ben,
                now=clock(day + timedelta(hours=3)))
    book.append([entry(("grapes 500 g", "East"), "note", None, "plan price above any seen")], ana,
                now=clock(day + timedelta(hours=4)))
    book.append([entry((HOSTILE[1], "North"), "note", None, "[red]not markup[/]")], ben,
                now=clock(day + timedelta(hours=4, minutes=20)))
    book.append([entry((HOSTILE[2], "North"), "note", None, "odd name \x1b[31mred")], ana,
                now=clock(day + timedelta(hours=4, minutes=30)))
    book.append([entry(rising, "accept", note="rise is a promotion week")], ana,
                now=clock(day + timedelta(hours=5)))
    return {"override_model": other, **one_by_one}


def build(folder: Path, results_name: str = "results.json", key: bytes | None = None) -> dict:
    """Data, results, ledger; returns their paths and what was decided."""
    data, plan = hostile_data(folder)
    results = folder / results_name
    fit(data, plan, results)
    ledger_path = folder / "ledger.jsonl"
    decided = decide(results, ledger_path, key)
    return {"data": data, "plan": plan, "results": results, "ledger": ledger_path, **decided}


def report(results: Path, ledger_path: Path, output: Path, *extra, env=None) -> subprocess.CompletedProcess:
    import os
    return subprocess.run([sys.executable, "-m", "pricefold", "report", str(results), "--ledger", str(ledger_path),
                           "-o", str(output), *extra], capture_output=True, text=True,
                          env=None if env is None else {**os.environ, **env})


def records(ledger_path: Path) -> list[dict]:
    return [json.loads(line) for line in ledger_path.read_text(encoding="utf-8").splitlines()]
