"""Planning cycles through the command line: fit --ledger, ledger carry, show --ledger, export.

The data are invented weekly series with straight-line demand (seeded); what is checked is
pricefold's own bookkeeping (which series are carried, flagged, skipped), with the backtest's
numbers checked against numpy and statsmodels in ``tests/fitcore/test_backtest.py``.
"""
from __future__ import annotations

import csv
import json
import subprocess
import sys
from datetime import date, timedelta

import numpy as np
import pytest

from fitcore import ledger
from fitcore.ledger.replay import series_id
from pricefold.cli import main

N_SERIES = 8
MOVER = "item 3"  # its demand drops by 40% in the third cycle


def write_weeks(path, weeks: int, drop_from: int | None = None, seed: int = 5) -> None:
    rng = np.random.default_rng(seed)
    rows = []
    for i in range(N_SERIES):
        a, b = rng.uniform(800, 1200), rng.uniform(150, 250)
        prices = np.round(2.0 + 0.6 * rng.random(60), 2)
        noise = rng.normal(0, 12, 60)
        for w in range(weeks):
            volume = a - b * prices[w] + noise[w]
            if drop_from is not None and w >= drop_from and f"item {i}" == MOVER:
                volume *= 0.6
            rows.append([f"item {i}", (date(2025, 1, 6) + timedelta(weeks=w)).isoformat(), f"{prices[w]:.2f}",
                         f"{volume:.1f}"])
    with open(path, "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["product", "week", "price", "volume"])
        writer.writerows(rows)


def fit(data, out, ledger_path=None):
    args = ["fit", str(data), "--date", "week", "--plan-price", "2.3", "--degrees", "0-1", "--no-loglog",
            "-o", str(out), "--quiet"]
    assert main(args + (["--ledger", str(ledger_path)] if ledger_path else [])) == 0
    return {r["key"]["product"]: r for r in json.loads(out.read_text())["series"]}


def first_cycle_signed(tmp_path, book) -> dict:
    """The first cycle (40 weeks) fitted to ``r1.json`` and every unflagged series accepted into ``book``:
    the results' records by product."""
    write_weeks(tmp_path / "c1.csv", 40)
    first = fit(tmp_path / "c1.csv", tmp_path / "r1.json")
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    return first


def signed_then_next_rows(tmp_path, book) -> tuple[int, list, list]:
    """The first cycle signed into ``book`` (``first_cycle_signed``) and the second cycle's 44 weeks written to
    ``c2.csv``: (the series the ledger holds, the header, the rows)."""
    first_cycle_signed(tmp_path, book)
    write_weeks(tmp_path / "c2.csv", 44)
    with open(tmp_path / "c2.csv", newline="") as handle:
        header, *rows = list(csv.reader(handle))
    return len(histories(book)), header, rows


def write_redated(path, header: list, rows: list) -> None:
    """``rows`` with the mover's signed weeks (to 2025-10-06) a day later: its history revised, still fitting."""
    for row in rows:
        if row[0] == MOVER and row[1] <= "2025-10-06":
            row[1] = (date.fromisoformat(row[1]) + timedelta(days=1)).isoformat()
    with open(path, "w", newline="") as handle:
        csv.writer(handle).writerows([header, *rows])


def histories(path):
    return {h.latest["series"]["product"]: h for h in ledger.Ledger(path).histories.values()}


def test_three_cycles_sign_carry_sign(tmp_path, capsys):
    book = tmp_path / "ledger.jsonl"
    first = first_cycle_signed(tmp_path, book)
    signed = histories(book)
    assert len(signed) == sum(1 for r in first.values() if not r["flags"]) >= N_SERIES - 1
    assert all(h.current["signed"]["last_date"] == "2025-10-06" for h in signed.values())

    # Cycle 2: four more weeks of the same demand: every signed series passes and is carried.
    write_weeks(tmp_path / "c2.csv", 44)
    second = fit(tmp_path / "c2.csv", tmp_path / "r2.json", book)
    assert all(second[p]["backtest"]["status"] == "passed" and second[p]["backtest"]["new_rows"] == 4 for p in signed)
    capsys.readouterr()
    assert main(["ledger", "carry", str(tmp_path / "r2.json"), "--ledger", str(book), "--analyst", "bo"]) == 0
    assert f"carried {len(signed)} signed series" in capsys.readouterr().err
    carried = histories(book)
    for product, history in carried.items():
        current = history.current
        assert current["action"] == "carry" and current["carries"] == signed[product].current["digest"]
        assert current["fingerprint"] == second[product]["fingerprint"]
        assert current["signed"]["last_date"] == "2025-11-03"
        assert history.status(second[product]["fingerprint"]) == "accepted"

    # Cycle 3: the mover's demand drops; its carried curve fails the backtest and it stays for a human.
    write_weeks(tmp_path / "c3.csv", 48, drop_from=44)
    third = fit(tmp_path / "c3.csv", tmp_path / "r3.json", book)
    mover = third[MOVER]
    assert mover["backtest"]["status"] == "failed" and "shifted" in {f["code"] for f in mover["flags"]}
    assert mover["backtest"]["decision"] == carried[MOVER].current["digest"]
    assert mover["backtest"]["volume_change"] < -0.15 or mover["backtest"]["error_ratio"] > 2
    message = next(f["message"] for f in mover["flags"] if f["code"] == "shifted")
    # the carry's analyst and the accept it carries, both (the carry is "bo"'s: see the carry above)
    accepted_by = carried[MOVER].records[0]["analyst"]
    assert message.startswith(f"Accepted {carried[MOVER].records[0]['at'][:10]} by {accepted_by}, carried ")
    assert f"carried {carried[MOVER].current['at'][:10]} by bo:" in message
    assert "4 observations since, the carried refit's error is" in message and "× its CV error" in message
    capsys.readouterr()
    assert main(["ledger", "carry", str(tmp_path / "r3.json"), "--ledger", str(book)]) == 0
    err = capsys.readouterr().err
    assert f"carried {len(signed) - 1} signed series" in err and "backtest failed 1" in err
    now = histories(book)
    assert now[MOVER].status(mover["fingerprint"]) == "stale"
    others = [p for p in signed if p != MOVER]
    assert all(now[p].current["carries"] == signed[p].current["digest"] for p in others)  # the first accept
    # The analyst signs the mover again, as the screen does: this cycle's model, superseding what was seen.
    from fitcore.ledger.snapshot import from_records
    snap = from_records([(mover, mover["chosen"])], 0.95)[0]
    ledger.append(book, [ledger.Entry(series=mover["key"], action="accept", fingerprint=mover["fingerprint"],
                                      results="ab" * 32, model=mover["chosen"], proposed=mover["chosen"],
                                      supersedes=now[MOVER].latest["digest"], flags=["shifted"], signed=snap,
                                      note="demand fell 40%: the new curve")],  # past shifted: a note is due
                  ledger.Identity("ana", "ana", "host"))
    final = histories(book)
    assert all(final[p].status(third[p]["fingerprint"]) == "accepted" for p in signed)
    assert ledger.verify(book) == []
    assert main(["ledger", "export", str(book), "--results", str(tmp_path / "r3.json"), "-o",
                 str(tmp_path / "e.csv")]) == 0
    rows = {r["product"]: r for r in csv.DictReader(open(tmp_path / "e.csv", newline=""))}
    assert rows[MOVER]["carried_from"] == ""
    first_accept = signed[others[0]].current
    assert rows[others[0]]["carried_from"] == f"{first_accept['seq']}:{first_accept['digest']}"
    capsys.readouterr()
    assert main(["show", str(tmp_path / "r3.json"), "--ledger", str(book)]) == 0
    shown = capsys.readouterr().out
    assert "accepted (carried)" in shown and shown.count("accepted (carried)") == len(others)


def test_a_restated_history_is_not_carried_and_a_superseded_backtest_is_not_shown(tmp_path, capsys):
    """The mover's rows up to the signed last date rewritten (its slope halved) before the next cycle: the backtest
    says history-changed, carry leaves it, show --ledger says why.  Then a hold recorded after that fit: show
    --ledger gave the backtest of the accept the hold replaced (ratio, cover, shifted) as the series' own."""
    book = tmp_path / "ledger.jsonl"
    first_cycle_signed(tmp_path, book)
    write_weeks(tmp_path / "c2.csv", 44)
    with open(tmp_path / "c2.csv", newline="") as handle:
        rows = list(csv.reader(handle))
    for row in rows[1:]:
        if row[0] == MOVER and row[1] < "2025-10-07":  # the signed weeks: volume restated around the plan price
            row[3] = f"{float(row[3]) + 200 * (float(row[2]) - 2.3):.1f}"
    with open(tmp_path / "c2x.csv", "w", newline="") as handle:
        csv.writer(handle).writerows(rows)
    second = fit(tmp_path / "c2x.csv", tmp_path / "r2.json", book)
    assert second[MOVER]["backtest"]["status"] == "history-changed" and second[MOVER]["backtest"]["revised"]
    assert "shifted" in {f["code"] for f in second[MOVER]["flags"]}
    assert all(not r["backtest"]["revised"] for p, r in second.items() if p != MOVER and r["backtest"])
    capsys.readouterr()
    assert main(["ledger", "carry", str(tmp_path / "r2.json"), "--ledger", str(book)]) == 0
    assert "history changed since signing 1" in capsys.readouterr().err
    assert main(["show", str(tmp_path / "r2.json"), "--ledger", str(book), "--product", MOVER]) == 0
    out = capsys.readouterr().out
    assert "due: history changed since signing" in out and "are not the 40 it was signed on" in out
    history = histories(book)[MOVER]
    ledger.append(book, [ledger.Entry(series=second[MOVER]["key"], action="hold", fingerprint=second[MOVER]["fingerprint"],
                                      results="ab" * 32, supersedes=history.latest["digest"], note="ask why")],
                  ledger.Identity("bo", "bo", "host"))
    assert main(["show", str(tmp_path / "r2.json"), "--ledger", str(book)]) == 0
    line = next(line for line in capsys.readouterr().out.splitlines() if line.startswith(MOVER))
    assert " held " in line and "shifted" not in line and line.split()[-3:-1] == ["—", "—"]
    assert main(["show", str(tmp_path / "r2.json"), "--ledger", str(book), "--product", MOVER]) == 0
    out = capsys.readouterr().out
    assert "tested a decision that no longer stands" in out and "since sign-off" not in out


@pytest.fixture()
def cycle_two(tmp_path):
    book = tmp_path / "ledger.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    fit(tmp_path / "c1.csv", tmp_path / "r1.json")
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    return book, fit(tmp_path / "c2.csv", tmp_path / "r2.json", book), tmp_path / "r2.json"


def test_carry_refuses_results_not_made_against_this_ledger(tmp_path, cycle_two, capsys):
    book, _, _ = cycle_two
    fit(tmp_path / "c2.csv", tmp_path / "plain.json")
    assert main(["ledger", "carry", str(tmp_path / "plain.json"), "--ledger", str(book)]) == 2
    assert "not made by 'pricefold fit --ledger'" in capsys.readouterr().err
    other = tmp_path / "other.jsonl"
    other.write_bytes(book.read_bytes())
    assert main(["ledger", "carry", str(tmp_path / "r2.json"), "--ledger", str(other)]) == 2
    assert "backtested against" in capsys.readouterr().err
    assert main(["fit", str(tmp_path / "c2.csv"), "--date", "week", "-o", str(book), "--ledger", str(book)]) == 2


def test_carry_refuses_a_ledger_cut_back_since_the_fit(cycle_two, capsys):
    # The results hold the head 'fit --ledger' read; a ledger whose end was removed since (here the
    # last line: the whole bulk accept no longer counts) must not be carried on as if nothing happened.
    book, _, results = cycle_two
    book.write_bytes(b"".join(book.read_bytes().splitlines(keepends=True)[:-1]))
    before = book.read_bytes()
    capsys.readouterr()
    assert main(["ledger", "carry", str(results), "--ledger", str(book)]) == 2
    err = capsys.readouterr().err
    assert "no longer holds record 8:" in err and "nothing was carried" in err
    assert book.read_bytes() == before


def test_carry_skips_series_whose_ledger_changed_since_the_fit(cycle_two, capsys):
    book, second, results = cycle_two
    held = histories(book)["item 1"]
    ledger.append(book, [ledger.Entry(series={"product": "item 1"}, action="note",
                                      fingerprint=second["item 1"]["fingerprint"], results="ab" * 32,
                                      note="asked the buyer", supersedes=held.latest["digest"])],
                  ledger.Identity("cy", "cy", "host"))
    capsys.readouterr()
    assert main(["ledger", "carry", str(results), "--ledger", str(book)]) == 0
    assert "changed since the fit 1" in capsys.readouterr().err
    after = histories(book)
    assert after["item 1"].current["action"] == "accept" and after["item 2"].current["action"] == "carry"


def test_analysts_carrying_at_once_record_one_carry_per_series(cycle_two):
    book, second, results = cycle_two
    runs = [subprocess.Popen([sys.executable, "-m", "pricefold", "ledger", "carry", str(results), "--ledger", str(book),
                              "--analyst", f"analyst{k}"], stderr=subprocess.PIPE, text=True) for k in range(3)]
    for run in runs:
        assert run.wait(90) == 0, run.stderr.read()
    records = [json.loads(line) for line in book.read_text().splitlines()]
    carries = [series_id(r["series"]) for r in records if r["action"] == "carry"]
    assert len(carries) == len(set(carries)) == sum(1 for r in second.values() if r.get("backtest")) > 4
    assert ledger.verify(book) == []


def test_dask_engine_backtests_as_the_local_engine(cycle_two, tmp_path):
    pytest.importorskip("distributed")
    book, _, _ = cycle_two
    base = ["fit", str(tmp_path / "c2.csv"), "--date", "week", "--plan-price", "2.3", "--degrees", "0-1",
            "--no-loglog", "--ledger", str(book), "--quiet"]
    assert main(base + ["-o", str(tmp_path / "local.parquet")]) == 0
    assert main(base + ["-o", str(tmp_path / "parts"), "--engine", "dask", "--workers", "1", "--partitions", "3"]) == 0
    from fitcore.results.read import read_results
    local_head, local = read_results(tmp_path / "local.parquet")
    dask_head, parts = read_results(tmp_path / "parts")
    assert dask_head["ledger"] == local_head["ledger"] and local_head["ledger"]["state"] == "intact"
    by_key = {r["key"]["product"]: r for r in parts}
    assert len(by_key) == len(local) == N_SERIES
    tested = 0
    for record in local:
        other = by_key[record["key"]["product"]]
        assert other["backtest"] == record["backtest"] and other["flags"] == record["flags"]
        tested += record["backtest"] is not None and record["backtest"]["status"] == "passed"
    assert tested >= N_SERIES - 2


def test_carry_from_parquet_records_what_it_does_from_json(cycle_two, tmp_path):
    book, _, _ = cycle_two
    carried = {}
    for kind in ("json", "parquet"):
        copy = tmp_path / f"{kind}.jsonl"
        copy.write_bytes(book.read_bytes())
        out = tmp_path / f"r.{kind}"
        assert main(["fit", str(tmp_path / "c2.csv"), "--date", "week", "--plan-price", "2.3", "--degrees", "0-1",
                     "--no-loglog", "-o", str(out), "--ledger", str(copy), "--quiet"]) == 0
        assert main(["ledger", "carry", str(out), "--ledger", str(copy), "-q"]) == 0
        carried[kind] = {r["series"]["product"]: (r["carries"], r["flags"], r["model"], r["signed"])
                         for r in ledger.Ledger(copy).records if r["action"] == "carry"}
    assert len(carried["json"]) > 4 and carried["json"].keys() == carried["parquet"].keys()
    for product, (carries, flags, model, signed) in carried["json"].items():
        other = carried["parquet"][product]
        assert other[:3] == (carries, flags, model) and other[3].keys() == signed.keys()
        np.testing.assert_allclose(np.array(other[3]["cov_unscaled"]), np.array(signed["cov_unscaled"]), rtol=1e-12)
        assert other[3]["plan"] == pytest.approx(signed["plan"], rel=1e-12)
        assert other[3]["last_date"] == signed["last_date"]


@pytest.mark.parametrize("kind", ["json", "parquet"])
def test_an_override_is_carried_while_its_shape_stays_within_one_se(tmp_path, kind):
    book = tmp_path / "ledger.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=11)
    common = ["--date", "week", "--plan-price", "2.3", "--degrees", "1-2", "--no-loglog", "--quiet"]
    assert main(["fit", str(tmp_path / "c1.csv"), *common, "-o", str(tmp_path / f"r1.{kind}")]) == 0
    from fitcore.ledger.snapshot import from_records
    from fitcore.results.read import read_results
    records = read_results(tmp_path / f"r1.{kind}")[1]
    record = next(r for r in records if r["chosen"] == "poly1" and not r["flags"])
    ledger.append(book, [ledger.Entry(series=record["key"], action="override", fingerprint=record["fingerprint"],
                                      results="ab" * 32, model="poly2", proposed="poly1",
                                      note="the buyer expects a bend",
                                      signed=from_records([(record, "poly2")], 0.95)[0])],
                  ledger.Identity("ana", "ana", "host"))
    write_weeks(tmp_path / "c2.csv", 44, seed=11)
    out = tmp_path / f"r2.{kind}"
    assert main(["fit", str(tmp_path / "c2.csv"), *common, "-o", str(out), "--ledger", str(book)]) == 0
    now = next(r for r in read_results(out)[1] if r["key"] == record["key"])
    cands = {c["name"]: c for c in now["candidates"]}
    best = min(cands.values(), key=lambda c: c["cv_mse"])
    assert now["chosen"] == "poly1" and cands["poly2"]["cv_mse"] <= best["cv_mse"] + best["cv_se"]
    assert main(["ledger", "carry", str(out), "--ledger", str(book), "-q"]) == 0
    history = histories(book)[record["key"]["product"]]
    carried = history.current
    assert carried["action"] == "carry" and carried["model"] == "poly2" and carried["proposed"] == "poly1"
    assert carried["carries"] == history.records[0]["digest"] and carried["signed"]["candidate"] == "poly2"
    assert history.status(now["fingerprint"]) == "overridden"  # an override carried is still one


def with_promo(path) -> None:
    """Add a 0/1 ``promo`` column (seeded; no effect on volume: only the settings differ)."""
    import pandas as pd
    frame = pd.read_csv(path)
    frame["promo"] = np.random.default_rng(3).integers(0, 2, len(frame))
    frame.to_csv(path, index=False)


def test_a_model_signed_under_other_controls_is_not_carried(tmp_path, capsys):
    # The same curve family fitted with a control held fixed is another model: a cycle that adds (or
    # drops) a control must send its signed series back to an analyst, whatever the backtest says.
    book = tmp_path / "ledger.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    with_promo(tmp_path / "c1.csv"), with_promo(tmp_path / "c2.csv")
    fit(tmp_path / "c1.csv", tmp_path / "r1.json")
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    signed = histories(book)
    assert all(h.current["signed"]["controls"] is None for h in signed.values())
    args = ["fit", str(tmp_path / "c2.csv"), "--date", "week", "--plan-price", "2.3", "--degrees", "0-1",
            "--no-loglog", "--control", "promo", "--quiet", "--ledger", str(book)]
    assert main(args + ["-o", str(tmp_path / "r2.json")]) == 0
    second = {r["key"]["product"]: r for r in json.loads((tmp_path / "r2.json").read_text())["series"]}
    assert {second[p]["backtest"]["status"] for p in signed} == {"controls-changed"}
    capsys.readouterr()
    before = book.read_bytes()
    assert main(["ledger", "carry", str(tmp_path / "r2.json"), "--ledger", str(book)]) == 0
    assert f"carried no series: nothing written to {book}" in capsys.readouterr().err  # not "carried 0 … → L"
    assert book.read_bytes() == before

    # Signed with promo held fixed, the next fit with promo again is the same model: tested and carried.
    book2 = tmp_path / "ledger2.jsonl"
    assert main(args[:-2] + ["-o", str(tmp_path / "p1.json")]) == 0  # no ledger yet: a first cycle, without one
    assert main(["ledger", "accept-unflagged", str(tmp_path / "p1.json"), "--ledger", str(book2), "-q"]) == 0
    assert all(h.current["signed"]["controls"] == ["promo"] for h in histories(book2).values())
    write_weeks(tmp_path / "c3.csv", 48, seed=9)
    with_promo(tmp_path / "c3.csv")
    assert main(args[:1] + [str(tmp_path / "c3.csv")] + args[2:-1] + [str(book2), "-o", str(tmp_path / "p2.json")]) == 0
    third = {r["key"]["product"]: r for r in json.loads((tmp_path / "p2.json").read_text())["series"]}
    assert "controls-changed" not in {third[p]["backtest"]["status"] for p in histories(book2)}


def test_fit_forks_the_ledger_read_before_the_warm_up_thread_starts(tmp_path, monkeypatch):
    """``fit --ledger`` reads the ledger in a forked process: a fork taken while another thread holds an
    import lock leaves the child waiting on that lock for ever (POSIX: only the forking thread exists in the
    child).  The warm-up thread imports as it starts, so no thread of the command's may be running at the
    fork: the threads alive then are recorded (the warm-up told the loops are cached, so that it starts)."""
    import threading

    import fitcore.compiled
    import pricefold.fit_ledger as fit_ledger
    book = tmp_path / "ledger.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    fit(tmp_path / "c1.csv", tmp_path / "r1.json")
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    alive_at_fork = []
    original = fit_ledger.LedgerAhead.__init__

    def recording(self, *args, **kwargs):
        alive_at_fork.append(sorted(thread.name for thread in threading.enumerate()))
        original(self, *args, **kwargs)
    monkeypatch.setattr(fit_ledger.LedgerAhead, "__init__", recording)
    monkeypatch.setattr(fitcore.compiled, "looks_compiled", lambda: True)
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    before = {thread.name for thread in threading.enumerate()}  # other tests' idle readers of stored results
    fit(tmp_path / "c2.csv", tmp_path / "r2.json", book)
    assert len(alive_at_fork) == 1
    assert not [name for name in alive_at_fork[0] if name.startswith("pricefold") and name not in before]


def test_a_curve_signed_at_another_plan_price_says_what_was_signed_then_the_curve_at_the_new_price(tmp_path, capsys):
    """Between cycles the plan moves the price (2.30 → 2.10).  The shifted sentence (results, show, screen) must
    not read as if the signed curve's volume at the new price had been signed: it says the signed numbers at
    the signed price — what the export writes — then the signed curve at this plan's price, as such."""
    book = tmp_path / "ledger.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    common = ["--date", "week", "--degrees", "0-1", "--no-loglog", "--quiet"]
    assert main(["fit", str(tmp_path / "c1.csv"), "--plan-price", "2.3", "-o", str(tmp_path / "r1.json"), *common]) == 0
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    for out in ("r2.json", "r2.parquet"):
        assert main(["fit", str(tmp_path / "c2.csv"), "--plan-price", "2.1", "-o", str(tmp_path / out),
                     "--ledger", str(book), *common]) == 0
    record = next(r for r in json.loads((tmp_path / "r2.json").read_text())["series"] if r.get("backtest"))
    bt, signed = record["backtest"], histories(book)[record["key"]["product"]].current["signed"]
    assert signed["plan"]["price"] == 2.3 and bt["price"] == 2.1
    assert (bt["signed_price"], bt["signed_plan_volume"], bt["signed_plan_lo"], bt["signed_plan_hi"]) == (
        2.3, signed["plan"]["volume"], signed["plan"]["lo"], signed["plan"]["hi"])
    assert bt["signed_volume"] == pytest.approx(np.polyval(signed["coef"][::-1], 2.1), rel=1e-9)  # numpy's polyval
    from fitcore.review.formats import fmt
    said = (f"Signed {bt['signed_at']} by {bt['analyst']}: {bt['candidate']}, {fmt(signed['plan']['volume'])} "
            f"({fmt(signed['plan']['lo'])}–{fmt(signed['plan']['hi'])}) at 2.30; at this plan's price 2.10 the signed "
            f"curve gives {fmt(bt['signed_volume'])} ({fmt(bt['signed_lo'])}–{fmt(bt['signed_hi'])}).")
    for results in ("r2.json", "r2.parquet"):
        capsys.readouterr()
        assert main(["show", str(tmp_path / results), "--ledger", str(book), "--product", record["key"]["product"]]) == 0
        assert said in capsys.readouterr().out


def test_a_revised_history_is_carried_only_on_request_and_a_reordered_file_is_not_a_revision(tmp_path, capsys):
    """Trials found: every old week re-dated by a day made one old week count as "since" and diluted failing
    backtests into passes (carried); a file sorted by price held back every unchanged series as revised; and a
    carry over a revised history left no trace in the ledger."""
    book = tmp_path / "ledger.jsonl"
    signed, header, rows = signed_then_next_rows(tmp_path, book)
    with open(tmp_path / "sorted.csv", "w", newline="") as handle:  # the same rows, by price within each series
        csv.writer(handle).writerows([header, *sorted(rows, key=lambda row: (row[0], row[2]))])
    second = fit(tmp_path / "sorted.csv", tmp_path / "r2.json", book)
    assert not any(r["backtest"]["revised"] for r in second.values() if r["backtest"])
    write_redated(tmp_path / "redated.csv", header, rows)  # its last signed week now reads as one since
    third = fit(tmp_path / "redated.csv", tmp_path / "r3.json", book)
    bt = third[MOVER]["backtest"]
    assert bt["revised"] and bt["new_rows"] == 5 and (bt["history_rows"], bt["signed_rows"]) == (39, 40)
    capsys.readouterr()
    copy = tmp_path / "copy.jsonl"
    copy.write_bytes(book.read_bytes())
    assert main(["ledger", "carry", str(tmp_path / "r3.json"), "--ledger", str(book)]) == 0
    assert "history revised since signing 1" in capsys.readouterr().err
    assert histories(book)[MOVER].current["action"] == "accept"  # not carried
    fit(tmp_path / "redated.csv", tmp_path / "r4.json", copy)
    assert main(["ledger", "carry", str(tmp_path / "r4.json"), "--ledger", str(copy), "--carry-revised",
                 "--note", "weekly dates moved to Tuesdays"]) == 0
    assert "1 of them over a revised history" in capsys.readouterr().err
    carried = histories(copy)[MOVER].current
    assert carried["action"] == "carry" and carried["note"] == (
        "weekly dates moved to Tuesdays; history revised since signing: carried with --carry-revised")
    assert sum(h.current["action"] == "carry" for h in histories(copy).values()) <= signed


def test_a_signed_curve_tested_and_priced_outside_the_prices_it_was_signed_on_says_it_is_an_extrapolation(
        tmp_path, capsys):
    """A trial: the signed curve saw prices 1.21–1.77; the new plan price 2.23 and all 8 new rows lay outside,
    and the sentence said only "0 of 8 fell outside its band" — true because the band is enormous out there.
    Now the backtest keeps the prices the curve was signed on (its window's ends) and how many rows since lie
    outside them, and the sentence says so; a series tested inside them says nothing of it."""
    book = tmp_path / "ledger.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    common = ["--date", "week", "--degrees", "0-1", "--no-loglog", "--quiet"]
    assert main(["fit", str(tmp_path / "c1.csv"), "--plan-price", "2.3", "-o", str(tmp_path / "r1.json"), *common]) == 0
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    rows = list(csv.reader(open(tmp_path / "c1.csv")))
    moved = "item 2"  # its price raised to 3.00–3.25 for six weeks; the others' six new weeks inside the old prices
    for w in range(40, 46):
        for i in range(N_SERIES):
            price = 3.0 + 0.05 * (w - 40) if f"item {i}" == moved else 2.1 + 0.05 * (w - 40)
            rows.append([f"item {i}", (date(2025, 1, 6) + timedelta(weeks=w)).isoformat(), f"{price:.2f}",
                         f"{1000 - 200 * price:.1f}"])
    with open(tmp_path / "c2.csv", "w", newline="") as handle:
        csv.writer(handle).writerows(rows)
    (tmp_path / "plan.csv").write_text("product,plan_price\n" + "".join(
        f"item {i},{3.1 if f'item {i}' == moved else 2.3}\n" for i in range(N_SERIES)))
    for out in ("r2.json", "r2.parquet"):
        assert main(["fit", str(tmp_path / "c2.csv"), "--plan", str(tmp_path / "plan.csv"), "-o", str(tmp_path / out),
                     "--ledger", str(book), *common]) == 0
    by_key = {r["key"]["product"]: r for r in json.loads((tmp_path / "r2.json").read_text())["series"]}
    signed_prices = [float(r[2]) for r in rows[1:41 * N_SERIES] if r[0] == moved and r[1] < "2025-10-13"]
    bt = by_key[moved]["backtest"]
    assert len(signed_prices) == 40 and bt["new_rows"] == 6 and bt["rows_outside"] == 6
    assert (bt["signed_price_lo"], bt["signed_price_hi"]) == pytest.approx((min(signed_prices), max(signed_prices)),
                                                                            rel=1e-12)  # the CSV's own prices
    inside = by_key["item 5"]["backtest"]
    assert inside["new_rows"] == 6 and inside["rows_outside"] == 0
    fitted_over = f"{min(signed_prices):.2f}–{max(signed_prices):.2f}"
    for results in ("r2.json", "r2.parquet"):
        capsys.readouterr()
        assert main(["show", str(tmp_path / results), "--ledger", str(book), "--product", moved]) == 0
        said = " ".join(capsys.readouterr().out.split())
        assert "the signed curve gives" in said and f", an extrapolation beyond the prices {fitted_over} it was signed on." in said
        assert f"On the 6 observations since (all priced outside the {fitted_over} it was signed on, where its band is wide)," in said
        assert main(["show", str(tmp_path / results), "--ledger", str(book), "--product", "item 5"]) == 0
        said = " ".join(capsys.readouterr().out.split())
        assert "On the 6 observations since, its error" in said and "it was signed on" not in said


def test_a_plan_beyond_the_prices_a_curve_was_signed_on_is_left_for_a_person(tmp_path, capsys):
    """A trial: a plan moved 2.20 → 3.30, past the prices 1.61–2.73 the curve was signed on; the new rows went there
    too, the backtest passed, and carry carried it — said only in the backtest's sentence.  No person had seen the
    curve at that price: carry leaves it ('plan beyond signed prices'), and show --ledger says the same."""
    rng = np.random.default_rng(4)
    rows = [["product", "week", "price", "volume"]]
    for w in range(48):
        for name in ("moved", "kept"):
            price = 2.0 + 0.6 * rng.random() if w < 40 or name == "kept" else 2.7 + 0.07 * (w - 40)
            rows.append([name, (date(2025, 1, 6) + timedelta(weeks=w)).isoformat(), f"{price:.2f}",
                         f"{1000 - 200 * price + rng.normal(0, 5):.1f}"])
    with open(tmp_path / "c1.csv", "w", newline="") as handle:
        csv.writer(handle).writerows(rows[:1 + 80])
    with open(tmp_path / "c2.csv", "w", newline="") as handle:
        csv.writer(handle).writerows(rows)
    common = ["--date", "week", "--degrees", "0-1", "--no-loglog", "--quiet"]
    book = tmp_path / "ledger.jsonl"
    assert main(["fit", str(tmp_path / "c1.csv"), "--plan-price", "2.3", "-o", str(tmp_path / "r1.json"), *common]) == 0
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    (tmp_path / "plan.csv").write_text("product,plan_price\nmoved,3.1\nkept,2.3\n")
    assert main(["fit", str(tmp_path / "c2.csv"), "--plan", str(tmp_path / "plan.csv"), "-o", str(tmp_path / "r2.json"),
                 "--ledger", str(book), *common]) == 0
    tested = {r["key"]["product"]: r["backtest"] for r in json.loads((tmp_path / "r2.json").read_text())["series"]}
    assert tested["moved"]["status"] == "passed" and not tested["moved"]["shifted"]  # nothing else holds it back
    assert tested["moved"]["signed_price_hi"] < 2.7 < 3.1
    capsys.readouterr()
    assert main(["show", str(tmp_path / "r2.json"), "--ledger", str(book), "--product", "moved"]) == 0
    assert "due: plan beyond signed prices" in capsys.readouterr().out
    copy = tmp_path / "copy.jsonl"
    copy.write_bytes(book.read_bytes())
    assert main(["fit", str(tmp_path / "c2.csv"), "--plan", str(tmp_path / "plan.csv"), "-o",
                 str(tmp_path / "r2.parquet"), "--ledger", str(copy), *common]) == 0
    for results, ledger_path in (("r2.json", book), ("r2.parquet", copy)):  # carry's two readings of results
        capsys.readouterr()
        assert main(["ledger", "carry", str(tmp_path / results), "--ledger", str(ledger_path)]) == 0
        assert "left for a human: 1 (plan beyond signed prices 1)" in capsys.readouterr().err, results
        now = histories(ledger_path)
        assert now["kept"].current["action"] == "carry" and now["moved"].current["action"] == "accept"
