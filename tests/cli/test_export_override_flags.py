"""``ledger export``: a row standing on another candidate than the proposal (an override) carries that curve's
own flags, not the proposal's.

Invented series (a falling line with a seeded bend and noise, one plan price) are fitted once as JSON and once
as Parquet; a ledger overrides some of them.  Which curves rise and which go below zero is checked apart from
pricefold, on the results' plain power-basis coefficients: numpy's ``Polynomial(coef).deriv()`` evaluated on a
grid of 2,001 prices over the observed range (the share of the grid where the slope is above zero, against the
``rising_share`` threshold), and ``Polynomial(coef)`` on the same grid for the lowest volume.  Only curves clearly
on one side of each threshold are used, so the grid's resolution decides nothing.
"""
from __future__ import annotations

import csv
import io
import json
from pathlib import Path
from typing import NamedTuple

import numpy as np
import pytest
from numpy.polynomial import Polynomial

from fitcore import ledger
from fitcore.review.candidate_checks import CHECKED, OF_THE_SERIES, PROPOSAL_ONLY, codes_for_another, record_checks
from fitcore.review.flags import CODES
from fitcore.review.thresholds import Thresholds
from pricefold.cli import main
from tests.fitcore.ledger_support import ANA

PLAN_PRICE = 2.4
LIMIT = Thresholds().rising_share
MARGIN = 0.05  # a rising share this far above the threshold
LOW = 5.0  # a lowest volume this far from 0 (volumes here are in the hundreds)


def _shape(candidate: dict, lo: float, hi: float) -> tuple[float, float]:
    """(share of [lo, hi] where the curve rises, its lowest volume there or at the plan price) from its plain
    coefficients."""
    grid = np.linspace(lo, hi, 2001)
    curve = Polynomial(candidate["coef"])
    return float((curve.deriv()(grid) > 0).mean()), float(min(curve(grid).min(), curve(PLAN_PRICE)))


def _codes(record: dict) -> list[str]:
    return [flag["code"] for flag in record["flags"]]


def _pick(series: list[dict], wanted) -> tuple[dict, str]:
    """The first series and available polynomial candidate (not the proposal) for which ``wanted(record,
    proposal's shape, candidate's shape)`` holds."""
    for record in series:
        lo, hi = record["price_range"]
        cands = {c["name"]: c for c in record["candidates"] if c["available"] and c["family"] == "poly"}
        if record["chosen"] not in cands:
            continue
        mine = _shape(cands[record["chosen"]], lo, hi)
        for name, cand in cands.items():
            if name != record["chosen"] and wanted(record, mine, _shape(cand, lo, hi)):
                return record, name
    raise AssertionError("the invented series hold no such case: change the seed")


def _rises(shape) -> bool:
    return shape[0] > LIMIT + MARGIN


def _flat_or_falling(shape) -> bool:
    return shape[0] == 0.0


class Run(NamedTuple):
    document: dict  # the JSON results
    cases: dict  # name → (record, the model overriding its proposal)
    exported: dict  # "json", "parquet" → the export's bytes
    parquet: Path  # the Parquet results
    book: Path  # the ledger


@pytest.fixture(scope="module")
def run(tmp_path_factory) -> Run:
    work = tmp_path_factory.mktemp("override_flags")
    rng = np.random.default_rng(7)
    rows, plan = ["product,price,volume"], ["product,plan_price"]
    for i in range(30):
        price = rng.uniform(1.0, 3.0, 24)
        bend, noise = rng.uniform(-120, 160), rng.uniform(5, 80)
        volume = 900 - 250 * price + bend * (price - 1.0) ** 2 + rng.normal(0, noise, price.size)
        rows += [f"item {i:02d},{p:.2f},{v:.1f}" for p, v in zip(price, volume) if v > 0]  # no row rejected
        plan.append(f"item {i:02d},{PLAN_PRICE}")
    (work / "data.csv").write_text("\n".join(rows) + "\n")
    (work / "plan.csv").write_text("\n".join(plan) + "\n")
    results = {kind: work / f"results.{kind}" for kind in ("json", "parquet")}
    for path in results.values():
        assert main(["fit", str(work / "data.csv"), "--plan", str(work / "plan.csv"), "-o", str(path), "-q"]) == 0
    document = json.loads(results["json"].read_text())
    series = document["series"]
    cases = {
        # the proposal flat or falling but doubted for its own fit; the override rises
        "rises, proposal near-tie": _pick(series, lambda r, mine, other: "near-tie" in _codes(r)
                                          and _flat_or_falling(mine) and _rises(other)),
        "rises, proposal weak-fit": _pick(series, lambda r, mine, other: "weak-fit" in _codes(r)
                                          and _flat_or_falling(mine) and _rises(other)),
        # the reverse: the proposal rises, the override does not
        "proposal rises": _pick(series, lambda r, mine, other: "rising" in _codes(r) and _rises(mine)
                                and _flat_or_falling(other)),
        # the override goes below zero in range, the proposal does not
        "below zero": _pick(series, lambda r, mine, other: mine[1] > LOW and other[1] < -LOW),
    }
    assert len({case[0]["key"]["product"] for case in cases.values()}) == len(cases)
    entries = []
    digest = ledger.results_digest(document)
    for record, model in cases.values():
        entries.append(ledger.Entry(series=record["key"], action="override", fingerprint=record["fingerprint"],
                                    results=digest, model=model, proposed=record["chosen"], note="looked at",
                                    flags=_codes(record)))
    overridden = {case[0]["key"]["product"] for case in cases.values()}
    for record in series:  # the others accepted, flagged or not: their rows keep the proposal's flags
        if record["chosen"] and record["key"]["product"] not in overridden:
            entries.append(ledger.Entry(series=record["key"], action="accept", fingerprint=record["fingerprint"],
                                        results=digest, model=record["chosen"], proposed=record["chosen"],
                                        note="fine", flags=_codes(record)))
    book = work / "ledger.jsonl"
    ledger.append(book, entries, ANA)
    exported = {}
    for kind, path in results.items():
        out = work / f"export-{kind}.csv"
        assert main(["ledger", "export", str(book), "--results", str(path), "-o", str(out), "-q"]) == 0
        exported[kind] = out.read_bytes()
    return Run(document, cases, exported, results["parquet"], book)


def _rows(data: bytes) -> dict[str, dict]:
    return {row["product"]: row for row in csv.DictReader(io.StringIO(data.decode("utf-8"), newline=""))}


@pytest.mark.parametrize("kind", ["json", "parquet"])
def test_an_override_carries_its_own_curves_flags(run, kind):
    cases = run.cases
    exported = run.exported
    rows = _rows(exported[kind])
    for name, (record, model) in cases.items():
        row = rows[record["key"]["product"]]
        assert row["status"] == "overridden" and row["model"] == model, name
        flags = row["flags"].split()
        assert not set(flags) & set(PROPOSAL_ONLY), (name, flags)  # the proposal's fit's, not this curve's
        assert row["inside_range"] == ("false" if "outside-range" in flags else "true"), name
        if name == "below zero":
            continue  # its own test
        if name.startswith("rises"):
            assert "rising" in flags and "rising" not in _codes(record), (name, flags)
            assert {"near-tie", "weak-fit"} & set(_codes(record)), name  # the case tests something
        else:
            assert "rising" not in flags and "rising" in _codes(record), (name, flags)


@pytest.mark.parametrize("kind", ["json", "parquet"])
def test_an_overrides_flags_say_below_zero_by_its_own_curve(run, kind):
    """Every overridden row says ``below-zero`` exactly where its own curve goes below zero over the observed
    prices or at the plan price (numpy's evaluation), whatever the proposal's curve does."""
    cases = run.cases
    exported = run.exported
    rows = _rows(exported[kind])
    for name, (record, model) in cases.items():
        lowest = _shape(next(c for c in record["candidates"] if c["name"] == model), *record["price_range"])[1]
        assert abs(lowest) > LOW, name  # clearly on one side
        assert ("below-zero" in rows[record["key"]["product"]]["flags"].split()) == (lowest < 0), name
    assert "below-zero" not in _codes(cases["below zero"][0])  # the proposal's flags would not say it


def test_both_results_formats_give_the_same_cells(run):
    exported = run.exported
    assert exported["json"] == exported["parquet"]


def test_a_row_standing_on_the_proposal_keeps_the_results_flags(run):
    """Not a change: every accepted row's flags and ``inside_range`` are the results' (as before)."""
    document = run.document
    cases = run.cases
    exported = run.exported
    rows = _rows(exported["json"])
    overridden = {record["key"]["product"] for record, _ in cases.values()}
    accepted = [r for r in document["series"] if r["chosen"] and r["key"]["product"] not in overridden]
    assert any(_codes(r) for r in accepted)
    for record in accepted:
        row = rows[record["key"]["product"]]
        assert row["status"] == "accepted" and row["flags"] == " ".join(_codes(record))
        assert row["inside_range"] == ("false" if "outside-range" in _codes(record) else "true")


def test_a_signed_curve_not_in_the_results_is_checked_as_the_candidate_would_be(run):
    """A model the results do not hold (a lineup without it) is checked on the signed snapshot's curve, which
    holds the same basis as the results' candidate: the same codes."""
    said = set()
    for record, model in run.cases.values():
        cand = next(c for c in record["candidates"] if c["name"] == model)
        snapshot = {"family": cand["family"], "basis": cand["basis"], "smearing": cand.get("smearing")}
        seen = (*record["price_range"], _codes(record))
        made = record_checks(cand, None, PLAN_PRICE, *seen, Thresholds()).codes
        assert record_checks(None, snapshot, PLAN_PRICE, *seen, Thresholds()).codes == made
        assert record_checks(None, None, PLAN_PRICE, *seen, Thresholds()) is None
        said.update(made)
    assert {"rising", "below-zero"} <= said  # the curves compared say something


def test_every_flag_is_of_the_series_of_the_proposal_or_checked_for_any_candidate():
    groups = [set(CHECKED), set(PROPOSAL_ONLY), set(OF_THE_SERIES)]
    assert sum(len(g) for g in groups) == len(CODES) and set().union(*groups) == set(CODES)
    every = list(CODES)
    assert codes_for_another(every, ("rising",)) == [c for c in CODES if c in OF_THE_SERIES or c == "rising"]
    assert codes_for_another(["outside-range", "rising", "near-tie"], None) == ["outside-range"]


def test_the_checked_codes_are_the_override_dialogs(run):
    """The screen's override dialog (``candidate_rows``, on the Parquet results as the screen opens them) shows
    each overridden candidate with the same ``rising``, ``below-zero`` and ``outside-range`` as its row."""
    from fitcore.results.stored import stored_results
    from tui.screens.override import candidate_rows
    results, diagnosis = stored_results(run.parquet)
    rows = _rows(run.exported["parquet"])
    products = [record["key"]["product"] for record in run.document["series"]]
    for name, (record, model) in run.cases.items():
        s = products.index(record["key"]["product"])
        shown = next(row.flags for row in candidate_rows(results, s, diagnosis) if row.name == model)
        assert [c for c in rows[record["key"]["product"]]["flags"].split() if c in CHECKED] == list(shown), name


def test_results_without_the_candidates_curves_say_what_the_row_cannot(run, tmp_path, capsys):
    """JSON results written before candidates carried their ``basis`` and a decision without a signed curve:
    the row keeps the series' codes and the plan's ``outside-range``, drops the proposal's, and a warning counts
    the rows whose curve could not be checked."""
    cases = run.cases
    older = json.loads(json.dumps(run.document))
    for record in older["series"]:
        for cand in record["candidates"]:
            for name in ("basis", "sigma2", "df", "cov_unscaled"):
                cand.pop(name, None)
    path = tmp_path / "older.json"
    path.write_text(json.dumps(older))
    out = tmp_path / "older.csv"
    assert main(["ledger", "export", str(run.book), "--results", str(path), "-o", str(out), "-q"]) == 0
    assert f"warning: {len(cases)} series stand on another model than the proposal" in capsys.readouterr().err
    rows = _rows(out.read_bytes())
    for name, (record, _) in cases.items():
        flags = rows[record["key"]["product"]]["flags"].split()
        assert flags == [c for c in _codes(record) if c in OF_THE_SERIES or c == "outside-range"], name


def test_parquet_results_replaced_while_read_are_refused(run, tmp_path, monkeypatch, capsys):
    """The overridden candidates' curves are read apart from the other columns: a file whose plain ``coef``
    there are no longer the ones read first (another fit put in its place meanwhile) stops the export in one
    line, nothing written."""
    from fitcore.results import series_columns
    real = series_columns.cells_at

    def replaced(path, rows, names):
        import pyarrow as pa
        cells = real(path, rows, names)
        moved = [[v + 1.0 for v in coef] for coef in cells.column("coef").to_pylist()]
        return cells.set_column(cells.schema.get_field_index("coef"), "coef", pa.array(moved))
    monkeypatch.setattr(series_columns, "cells_at", replaced)
    out = tmp_path / "out.csv"
    code = main(["ledger", "export", str(run.book), "--results", str(run.parquet), "-o", str(out), "-q"])
    err = capsys.readouterr().err
    assert code == 2 and not out.exists() and len(err.strip().splitlines()) == 1
    assert "changed while it was read" in err and str(run.parquet) in err


def test_a_controls_plan_value_outside_is_every_candidates_on_stored_results(tmp_path):
    """A control (an invented display share, seen between 0 and 0.3) planned at 0.6 with the plan price within
    the series' prices: ``outside-range`` for the proposal, and for every candidate in the override dialog on
    the results read back from Parquet (as on a fit of the data) and in an override's export row — the flag is
    of the plan, not of a curve."""
    from fitcore.results.read import read_header
    from fitcore.results.stored import stored_results
    from tui.screens.override import candidate_rows
    rng = np.random.default_rng(11)
    rows, plan = ["product,price,display,volume"], ["product,plan_price,display"]
    for i in range(3):
        price, display = rng.uniform(1.0, 3.0, 40), rng.uniform(0.0, 0.3, 40)
        volume = 900 - 250 * price + 400 * display + rng.normal(0, 20, 40)
        rows += [f"item {i},{p:.2f},{d:.3f},{v:.1f}" for p, d, v in zip(price, display, volume)]
        plan.append(f"item {i},2.00,{0.6 if i == 0 else 0.15}")
    (tmp_path / "data.csv").write_text("\n".join(rows) + "\n")
    (tmp_path / "plan.csv").write_text("\n".join(plan) + "\n")
    results_path = tmp_path / "controlled.parquet"
    assert main(["fit", str(tmp_path / "data.csv"), "--control", "display", "--plan", str(tmp_path / "plan.csv"),
                 "-o", str(results_path), "-q"]) == 0
    results, diagnosis = stored_results(results_path)
    s = [results.data.key_of(i)["product"] for i in range(results.n_series)].index("item 0")
    assert diagnosis.raised[s, CODES.index("outside-range")] and results.price_lo[s] < 2.0 < results.price_hi[s]
    shown = candidate_rows(results, s, diagnosis)
    assert len(shown) > 1 and all("outside-range" in row.flags for row in shown)
    other = next(row.name for row in shown if not row.proposed)
    book = tmp_path / "ledger.jsonl"
    header = {k: v for k, v in read_header(results_path).items() if k != "key_columns"}
    ledger.append(book, [ledger.Entry(series={"product": "item 0"}, action="override",
                                      fingerprint=results.data.fingerprint_of(s), results=ledger.results_digest(header),
                                      model=other, proposed=results.names[results.chosen[s]], note="display")], ANA)
    out = tmp_path / "out.csv"
    assert main(["ledger", "export", str(book), "--results", str(results_path), "-o", str(out), "-q"]) == 0
    row = _rows(out.read_bytes())["item 0"]
    assert row["model"] == other and "outside-range" in row["flags"].split() and row["inside_range"] == "false"
