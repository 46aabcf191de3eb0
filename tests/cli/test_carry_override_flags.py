"""``ledger carry`` judges an override by the flags of the curve it would make stand, not by its proposal's.

Invented weekly series (a falling line with a seeded bend and noise) are fitted over 40 weeks, two of them
overridden, then fitted again over 48 weeks with ``--ledger`` (JSON and Parquet) and carried.  ``--rule lowest``
proposes the candidate of lowest CV error, so an override can be a simpler curve within one SE of it.  Which
curves rise is checked apart from pricefold, on the second cycle's plain power-basis coefficients: numpy's
``Polynomial(coef).deriv()`` on a grid of 2,001 prices over the observed range (the share of the grid where the
slope is above zero, against the ``rising_share`` threshold).  Only curves clearly on one side of it are used.

- "override flat": the proposal rises, the override (a curve that never rises) is carried: it was left
  "stop flag (rising)" every cycle, for a flag of a curve that does not stand.
- "override rises": the override's refit rises where the proposal does not: left "stop flag (rising)" by
  carry, ``show --ledger`` and the screen alike (it was carried with no human).
"""
from __future__ import annotations

import csv
import io
import json
import shutil
from collections import Counter
from contextlib import redirect_stderr, redirect_stdout
from datetime import date, timedelta
from pathlib import Path
from typing import NamedTuple

import numpy as np
import pytest
from numpy.polynomial import Polynomial

from fitcore import ledger
from fitcore.ledger.snapshot import from_records
from fitcore.review.flags import SEVERITY
from fitcore.review.thresholds import Thresholds
from pricefold.cli import main
from tests.cli.test_cycle import histories

SERIES, SIGNED_WEEKS, WEEKS = 40, 40, 48
COMMON = ["--date", "week", "--plan-price", "2.0", "--degrees", "1-3", "--no-loglog", "--rule", "lowest", "-q"]
LIMIT = Thresholds().rising_share
MARGIN = 0.05  # a rising share this far above the threshold (or exactly none)
ANA = ledger.Identity("ana", "ana", "host")
RESULTS = ("r2.json", "r2.parquet")  # carried (``carried``)
SCREEN = "screen.parquet"  # the same, opened on the screen and never carried


def write_weeks(path: Path, weeks: int, seed: int = 4) -> None:
    """The first ``weeks`` weeks of the invented series (the same demand every cycle)."""
    rng = np.random.default_rng(seed)
    rows = []
    for i in range(SERIES):
        prices = rng.uniform(1.0, 3.0, WEEKS)
        bend, noise = rng.uniform(-100, 200), rng.uniform(5, 60)
        volume = 900 - 250 * prices + bend * (prices - 1.0) ** 2 + rng.normal(0, noise, WEEKS)
        rows += [[f"item {i:02d}", (date(2025, 1, 6) + timedelta(weeks=w)).isoformat(), f"{prices[w]:.2f}",
                  f"{volume[w]:.1f}"] for w in range(weeks) if volume[w] > 0]  # no row rejected
    with open(path, "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["product", "week", "price", "volume"])
        writer.writerows(rows)


def rising_share(cand: dict, lo: float, hi: float) -> float:
    """The share of [lo, hi] where the curve of plain coefficients ``cand["coef"]`` rises (numpy)."""
    slope = Polynomial(cand["coef"]).deriv()(np.linspace(lo, hi, 2001))
    return float((slope > 0).mean())


def within_one_se(record: dict, name: str) -> bool:
    cands = [c for c in record["candidates"] if c["available"]]
    best = min(cands, key=lambda c: c["cv_mse"])
    return next(c for c in cands if c["name"] == name)["cv_mse"] <= best["cv_mse"] + best["cv_se"]


def pick(series: list[dict], wanted) -> tuple[dict, str]:
    """The first series and candidate (not the proposal, within one SE of the lowest CV error) for which
    ``wanted(record, proposal's rising share, candidate's rising share)`` holds."""
    for record in series:
        lo, hi = record["price_range"]
        cands = {c["name"]: c for c in record["candidates"] if c["available"]}
        for name, cand in cands.items():
            if name != record["chosen"] and within_one_se(record, name) and \
                    wanted(record, rising_share(cands[record["chosen"]], lo, hi), rising_share(cand, lo, hi)):
                return record, name
    raise AssertionError("the invented series hold no such case: change the seed")


def stops(record: dict) -> set[str]:
    return {f["code"] for f in record["flags"] if SEVERITY[f["code"]] == "stop"}


class Cycles(NamedTuple):
    folder: Path
    cases: dict  # "override flat" / "override rises" → (product, the model overriding)
    second: dict  # product → the second cycle's record (JSON, fitted with --ledger)


def ledger_of(results: str) -> str:
    """Each results file is fitted against its own copy of the first cycle's ledger, carried into apart."""
    return f"ledger-{results.replace('.', '-')}.jsonl"


@pytest.fixture(scope="module")
def cycles(tmp_path_factory) -> Cycles:
    """Two overrides of the first cycle's rows (and accepts of the unflagged), the second cycle fitted with
    --ledger as JSON and as Parquet, nothing carried yet."""
    folder = tmp_path_factory.mktemp("carry_override_flags")
    write_weeks(folder / "c1.csv", SIGNED_WEEKS)
    write_weeks(folder / "c2.csv", WEEKS)
    assert main(["fit", str(folder / "c1.csv"), *COMMON, "-o", str(folder / "r1.json")]) == 0
    assert main(["fit", str(folder / "c2.csv"), *COMMON, "-o", str(folder / "look.json")]) == 0  # to pick by
    ahead = json.loads((folder / "look.json").read_text())["series"]
    cases = {
        "override flat": pick(ahead, lambda r, mine, other: stops(r) == {"rising"} and mine > LIMIT + MARGIN
                              and other == 0.0),
        "override rises": pick(ahead, lambda r, mine, other: not stops(r) and mine == 0.0 and other > LIMIT + MARGIN),
    }
    cases = {name: (record["key"]["product"], model) for name, (record, model) in cases.items()}
    first = {r["key"]["product"]: r for r in json.loads((folder / "r1.json").read_text())["series"]}
    book = folder / ledger_of(RESULTS[0])
    ledger.append(book, [ledger.Entry(series=first[product]["key"], action="override",
                                      fingerprint=first[product]["fingerprint"], results="ab" * 32, model=model,
                                      proposed=first[product]["chosen"], note="the buyer's view",
                                      signed=from_records([(first[product], model)], 0.95)[0])
                         for product, model in cases.values()], ANA)
    assert main(["ledger", "accept-unflagged", str(folder / "r1.json"), "--ledger", str(book), "-q"]) == 0
    for name in (*RESULTS, SCREEN):
        if name != RESULTS[0]:
            shutil.copyfile(book, folder / ledger_of(name))
        assert main(["fit", str(folder / "c2.csv"), *COMMON, "-o", str(folder / name),
                     "--ledger", str(folder / ledger_of(name))]) == 0
    second = {r["key"]["product"]: r for r in json.loads((folder / "r2.json").read_text())["series"]}
    for product, model in cases.values():  # nothing else keeps either from a carry
        bt = second[product]["backtest"]
        assert (bt["status"], bt["candidate"], bt["shifted"], bt["signed_near_best"]) == ("passed", model, False, True)
    return Cycles(folder, cases, second)


class Carried(NamedTuple):
    results: Path
    book: Path
    listed: dict  # product → what ``show --ledger``'s list said was due, before the carry
    counted: Counter  # carry's "left for a human" counts


@pytest.fixture(scope="module", params=RESULTS)
def carried(cycles, request) -> Carried:
    """``show --ledger``'s list of the results, then ``ledger carry`` of them into their ledger."""
    results, book = cycles.folder / request.param, cycles.folder / ledger_of(request.param)
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(io.StringIO()):
        assert main(["show", str(results), "--ledger", str(book)]) == 0
    header, *rows = out.getvalue().splitlines()
    due, ratio = header.index("due"), header.index("ratio")
    listed = {row.split("  ")[0].strip(): row[due:ratio].strip() for row in rows}
    with redirect_stderr(err):
        assert main(["ledger", "carry", str(results), "--ledger", str(book), "--analyst", "bo"]) == 0
    left = next(line for line in err.getvalue().splitlines() if line.startswith("left for a human: "))
    counted = Counter({" ".join(part.split()[:-1]): int(part.split()[-1])
                       for part in left[left.index("(") + 1:-1].split(" · ") if part != "none"})
    return Carried(results, book, listed, counted)


def shape(cycles: Cycles, name: str) -> tuple[float, float]:
    """(the proposal's, the override's) rising share on the second cycle's rows (numpy)."""
    product, model = cycles.cases[name]
    record = cycles.second[product]
    cands = {c["name"]: c for c in record["candidates"]}
    return tuple(rising_share(cands[n], *record["price_range"]) for n in (record["chosen"], model))


def test_an_override_of_a_rising_proposal_is_carried(cycles, carried):
    proposal, override = shape(cycles, "override flat")
    assert proposal > LIMIT + MARGIN and override == 0.0  # numpy: the proposal rises, the curve that stands never
    product, model = cycles.cases["override flat"]
    assert "rising" in {f["code"] for f in cycles.second[product]["flags"]}  # the proposal's flags say it
    history = histories(carried.book)[product]
    assert (history.current["action"], history.current["model"]) == ("carry", model)
    assert history.status(cycles.second[product]["fingerprint"]) == "overridden"


def test_a_carried_overrides_flags_are_its_own_curves(cycles, carried, tmp_path):
    """The carry records the flags of the curve it makes stand, as ``ledger export`` then gives them."""
    product, _ = cycles.cases["override flat"]
    flags = histories(carried.book)[product].current["flags"]
    assert "rising" not in flags and not set(flags) & {"near-tie", "weak-fit", "unsteady-folds", "influential-point"}
    out = tmp_path / "export.csv"
    assert main(["ledger", "export", str(carried.book), "--results", str(carried.results), "-o", str(out), "-q"]) == 0
    row = next(r for r in csv.DictReader(open(out, newline="")) if r["product"] == product)
    assert row["status"] == "overridden" and row["flags"].split() == flags


def test_an_override_whose_refit_rises_is_left_for_a_human(cycles, carried, capsys):
    proposal, override = shape(cycles, "override rises")
    assert proposal == 0.0 and override > LIMIT + MARGIN  # numpy: the curve that would stand rises
    product, _ = cycles.cases["override rises"]
    assert not stops(cycles.second[product])  # nothing in the proposal's flags holds it back
    assert histories(carried.book)[product].current["action"] == "override"  # not carried
    assert carried.counted["stop flag"] >= 1
    capsys.readouterr()
    assert main(["show", str(carried.results), "--ledger", str(carried.book), "--product", product]) == 0
    assert "ledger: stale — due: stop flag (rising)" in capsys.readouterr().out


def test_what_show_says_is_due_is_why_carry_leaves_it(cycles, carried):
    """Over every series, the reasons ``show --ledger``'s list gives (read before the carry) are the counts carry
    prints; the flat override is due "backtest passed", the rising one "stop flag (rising)"."""
    flat, rises = (cycles.cases[name][0] for name in ("override flat", "override rises"))
    assert carried.listed[flat] == "backtest passed" and carried.listed[rises] == "stop flag (rising)"
    reasons = Counter(why.split(" (")[0] for why in carried.listed.values() if why not in ("—", "backtest passed"))
    assert carried.counted == reasons


def test_the_screen_says_what_show_and_carry_say(cycles):
    """The triage screen's due of both overrides, on the Parquet results' own backtest and on a fit of the data
    (its live backtest)."""
    from fitcore.data.columns import Columns
    from fitcore.fit.settings import FitSettings
    from tui.factory import Source, open_session, open_stored_session
    book = cycles.folder / ledger_of(SCREEN)
    stored = open_stored_session(cycles.folder / SCREEN, book, ANA)
    live = open_session(Source(data=cycles.folder / "c2.csv", columns=Columns(date="week"),
                               settings=FitSettings(degrees=(1, 2, 3), loglog=False, rule="lowest"), plan_price=2.0),
                        book, ANA)
    for session in (stored, live):
        due = {name: session.due(int(session.keys.indices_of([{"product": product}])[0]))
               for name, (product, _) in cycles.cases.items()}
        assert due == {"override flat": "backtest passed", "override rises": "stop flag (rising)"}


def test_the_series_data_flags_still_hold_an_override_back(cycles):
    """Flags of the series' data and plan hold whichever curve stands: the flat override's record given
    ``few-points`` and ``flat-price`` is due those two stop flags — its proposal's ``rising`` dropped, not they."""
    from pricefold.cycle_cli import ledger_state
    from pricefold.ledger_cli import open_ledger
    product, _ = cycles.cases["override flat"]
    record = cycles.second[product]
    data = [{"code": code, "severity": SEVERITY[code], "message": ""} for code in ("few-points", "flat-price")]
    doctored = {**record, "flags": data + record["flags"]}
    status, due = ledger_state(doctored, open_ledger(cycles.folder / ledger_of(SCREEN)))
    assert (status, due) == ("stale", "stop flag (few-points, flat-price)")


def test_an_override_beyond_one_se_is_left_as_such_not_as_proposal_changed(cycles):
    """An override whose curve is no longer within one SE of the lowest CV error is left for a human, and show and
    carry say why in those words: its shape was never the proposal, so "proposal changed" (a trial's reading of
    an override of loglog over poly3 whose proposal had become poly4) told nothing.  The flat override's record
    given its model a CV error far above the others' (and the fit's kept answer to the same question)."""
    from pricefold.carry_cli import plan_from_records
    from pricefold.cycle_cli import ledger_state
    from pricefold.ledger_cli import open_ledger
    product, model = cycles.cases["override flat"]
    record = cycles.second[product]
    candidates = [{**c, "cv_mse": 1e9} if c["name"] == model else c for c in record["candidates"]]
    doctored = {**record, "candidates": candidates, "backtest": {**record["backtest"], "signed_near_best": False}}
    book = open_ledger(cycles.folder / ledger_of(SCREEN))
    assert ledger_state(doctored, book) == ("stale", "override not within one SE")
    assert ledger_state(record, book) == ("stale", "backtest passed")
    # an accept whose proposal changed: that is what it is due (neither word for the other's case)
    accepted = next(r for r in cycles.second.values() if r["key"]["product"] not in dict(cycles.cases.values())
                    and r["backtest"] and r["backtest"]["status"] == "passed" and not r["backtest"]["shifted"]
                    and not stops(r) and r["chosen"] == r["backtest"]["candidate"])
    other = next(c["name"] for c in accepted["candidates"] if c["available"] and c["name"] != accepted["chosen"])
    moved = {**accepted, "chosen": other, "backtest": {**accepted["backtest"], "shape_changed": True}}
    assert ledger_state(moved, book) == ("stale", "proposal changed")
    _, left = plan_from_records([doctored, moved], 0.95, overrides=frozenset({record["backtest"]["carries"]}),
                                histories=book.histories)
    assert left == {"override not within one SE": 1, "proposal changed": 1}
