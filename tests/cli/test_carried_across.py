"""What a carry carries across besides new rows: another weighting (never: another model, as other controls
are), another plan price and other CV settings (carried, and said), and whose decision a carry stands for.

Invented weekly series as in ``test_cycle``; what is checked is pricefold's bookkeeping.
"""
from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from fitcore import ledger
from fitcore.ledger.snapshot import from_records
from pricefold.cli import main
from tests.cli.test_cycle import histories, write_weeks

COMMON = ["--date", "week", "--degrees", "0-1", "--no-loglog", "--quiet"]


def with_weights(path, column: str = "w", seed: int = 4) -> None:
    """Add a weight column of 1s and 3s (seeded): the same rows, weighted."""
    frame = pd.read_csv(path)
    frame[column] = np.random.default_rng(seed).choice([1, 1, 1, 3], len(frame))
    frame.to_csv(path, index=False)


def fitted(data, out, *extra) -> dict:
    assert main(["fit", str(data), *COMMON, "--plan-price", "2.3", "-o", str(out), *extra]) == 0
    return {r["key"]["product"]: r for r in json.loads(out.read_text())["series"]}


def statuses(records: dict, signed) -> set:
    return {records[p]["backtest"]["status"] for p in signed}


def test_a_switch_of_weighting_is_another_model_and_never_carried(tmp_path, capsys):
    book = tmp_path / "L.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    for name in ("c1", "c2"):
        with_weights(tmp_path / f"{name}.csv")
        with_weights(tmp_path / f"{name}.csv", "w2", seed=8)
    fitted(tmp_path / "c1.csv", tmp_path / "r1.json")
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    signed = histories(book)
    assert all(h.current["signed"]["weight"] is None for h in signed.values())
    assert all(h.current["signed"]["cv"] == {"folds": 5, "fold_order": "shuffled", "seed": 0, "rule": "one-se"}
               for h in signed.values())

    # unweighted again: tested as before
    plain = fitted(tmp_path / "c2.csv", tmp_path / "p2.json", "--ledger", str(book))
    assert statuses(plain, signed) <= {"passed", "failed"} and "passed" in statuses(plain, signed)

    # weighted now: another model, whatever the backtest says — not "rows restated", not carried even with
    # --carry-revised
    second = fitted(tmp_path / "c2.csv", tmp_path / "r2.json", "--weight", "w", "--ledger", str(book))
    assert statuses(second, signed) == {"weights-changed"}
    some = next(iter(signed))
    bt = second[some]["backtest"]
    assert bt["weighting"] == "unweighted → weighted by w" and not bt["revised"] and bt["history_rows"] is None
    capsys.readouterr()
    before = book.read_bytes()
    assert main(["ledger", "carry", str(tmp_path / "r2.json"), "--ledger", str(book), "--carry-revised"]) == 0
    err = capsys.readouterr().err
    assert "carried no series" in err and f"weighting changed since signing {len(signed)}" in err
    assert book.read_bytes() == before
    assert main(["show", str(tmp_path / "r2.json"), "--ledger", str(book), "--product", some]) == 0
    out = capsys.readouterr().out
    assert "due: weighting changed since signing" in out and "(unweighted → weighted by w)" in out
    assert "restated" not in out

    # signed weighted by w: the same column again is the same model; another column is not
    book2 = tmp_path / "L2.jsonl"
    fitted(tmp_path / "c1.csv", tmp_path / "w1.json", "--weight", "w")
    assert main(["ledger", "accept-unflagged", str(tmp_path / "w1.json"), "--ledger", str(book2), "-q"]) == 0
    signed2 = histories(book2)
    assert all(h.current["signed"]["weight"] == "w" for h in signed2.values())
    same = fitted(tmp_path / "c2.csv", tmp_path / "w2.json", "--weight", "w", "--ledger", str(book2))
    assert "weights-changed" not in statuses(same, signed2)
    other = fitted(tmp_path / "c2.csv", tmp_path / "x2.json", "--weight", "w2", "--ledger", str(book2))
    assert statuses(other, signed2) == {"weights-changed"}
    dropped = fitted(tmp_path / "c2.csv", tmp_path / "d2.json", "--ledger", str(book2))
    assert statuses(dropped, signed2) == {"weights-changed"}
    assert dropped[next(iter(signed2))]["backtest"]["weighting"] == "weighted by w → unweighted"


def test_a_decision_signed_before_weighting_was_recorded(tmp_path):
    # Snapshots written before this record have no "weight": an unweighted cycle after them is judged as
    # before; a weighted one whose rows no longer hash as signed (the weights are hashed) is another model.
    book = tmp_path / "L.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    with_weights(tmp_path / "c2.csv")
    first = fitted(tmp_path / "c1.csv", tmp_path / "r1.json")
    entries = [ledger.Entry(series=r["key"], action="accept", fingerprint=r["fingerprint"], results="0" * 64,
                            model=r["chosen"], proposed=r["chosen"], signed=from_records([(r, r["chosen"])], 0.95)[0])
               for r in first.values() if not r["flags"]]
    assert entries and all("weight" not in e.signed and "cv" not in e.signed for e in entries)
    ledger.append(book, entries, ledger.Identity("ana", "ana", "host"))
    signed = histories(book)
    plain = fitted(tmp_path / "c2.csv", tmp_path / "p2.json", "--ledger", str(book))
    assert "passed" in statuses(plain, signed) and "weights-changed" not in statuses(plain, signed)
    assert not any(plain[p]["backtest"]["settings_changed"] for p in signed)  # not recorded: nothing said
    weighted = fitted(tmp_path / "c2.csv", tmp_path / "r2.json", "--weight", "w", "--ledger", str(book))
    assert statuses(weighted, signed) == {"weights-changed"}
    assert weighted[next(iter(signed))]["backtest"]["weighting"] == "not recorded, its rows changed → weighted by w"


@pytest.mark.parametrize("kind", ["json", "parquet"])
def test_a_carry_to_a_new_plan_price_or_other_settings_is_said(tmp_path, capsys, kind):
    book = tmp_path / "L.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    fitted(tmp_path / "c1.csv", tmp_path / "r1.json")
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q",
                 "--analyst", "ana"]) == 0
    out = tmp_path / f"r2.{kind}"
    assert main(["fit", str(tmp_path / "c2.csv"), *COMMON, "--plan-price", "2.2", "--folds", "10", "--rule", "lowest",
                 "-o", str(out), "--ledger", str(book)]) == 0
    records = {r["key"]["product"]: r for r in json.loads(
        (tmp_path / "r2.json").read_text())["series"]} if kind == "json" else None
    signed = histories(book)
    some = next(p for p in signed)
    capsys.readouterr()
    assert main(["show", str(out), "--ledger", str(book), "--product", some]) == 0
    said = capsys.readouterr().out
    across = ("to a new plan price: 2.30 → 2.20; fitted with other settings than signed: folds 5 → 10, "
              "rule one-se → lowest")
    assert any(line.startswith("ledger: stale — due: ") and line.endswith(f"; {across}") for line in said.splitlines())
    assert main(["ledger", "carry", str(out), "--ledger", str(book), "--analyst", "bo"]) == 0
    err = capsys.readouterr().err
    now = histories(book)
    carries = [h.current for h in now.values() if h.current["action"] == "carry"]
    assert carries and all(c["note"] == across for c in carries)
    n = len(carries)
    assert (f"carried {n} signed series to the new data → {book}; {n} of them to a new plan price; {n} fitted with "
            "other settings than signed: folds 5 → 10, rule one-se → lowest") in err
    if records is not None:
        assert records[some]["backtest"]["settings_changed"] == "folds 5 → 10, rule one-se → lowest"

    # the next cycle under the same settings and price: nothing carried across but rows, and the sentence says
    # whose accept the carry stands for and who carried it
    write_weeks(tmp_path / "c3.csv", 48, seed=9)
    third = tmp_path / f"r3.{kind}"
    assert main(["fit", str(tmp_path / "c3.csv"), *COMMON, "--plan-price", "2.2", "--folds", "10", "--rule", "lowest",
                 "-o", str(third), "--ledger", str(book)]) == 0
    carried = next(p for p, h in now.items() if h.current["action"] == "carry")
    capsys.readouterr()
    assert main(["show", str(third), "--ledger", str(book), "--product", carried]) == 0
    said = capsys.readouterr().out
    accept, carry = now[carried].records[0], now[carried].current
    assert f"Accepted {accept['at'][:10]} by ana, carried {carry['at'][:10]} by bo: " in said
    assert f"carried {carry['model']} forward at {carry['at'][11:19]} UTC (carries accept by ana" in said
    assert "to a new plan price" not in said and "other settings" not in said
