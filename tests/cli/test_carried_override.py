"""An override carried to the next cycle: its status, the model and numbers that stand, and the export.

A series whose proposal is a straight line is overridden to a quadratic (with a note) in the first cycle;
four more weeks of the same demand arrive and ``ledger carry`` carries the override forward.  The
numbers checked are the quadratic's prediction at the plan price and its 95% interval, against
statsmodels OLS ``get_prediction`` on the second cycle's rows of that series.
"""
from __future__ import annotations

import csv

import numpy as np
import pytest

from fitcore import ledger
from pricefold.cli import main
from tests.cli.test_cycle import histories, write_weeks

NOTE = "the buyer expects a bend"
HELD = "item 1"  # the first series after the overridden one (``item 0``): held in the first cycle
PLAN = 2.3
COMMON = ["--date", "week", "--plan-price", str(PLAN), "--degrees", "1-2", "--no-loglog", "--quiet"]


def carried_override(folder):
    """``(ledger, key, second cycle's data, second cycle's results)`` with ana's override carried by bo (and
    another series held by ana in the first cycle: ``HELD``)."""
    from fitcore.ledger.snapshot import from_records
    from fitcore.results.read import read_results
    book = folder / "ledger.jsonl"
    write_weeks(folder / "c1.csv", 40, seed=11)
    assert main(["fit", str(folder / "c1.csv"), *COMMON, "-o", str(folder / "r1.json")]) == 0
    record = next(r for r in read_results(folder / "r1.json")[1] if r["chosen"] == "poly1" and not r["flags"])
    ledger.append(book, [ledger.Entry(series=record["key"], action="override", fingerprint=record["fingerprint"],
                                      results="ab" * 32, model="poly2", proposed="poly1", note=NOTE,
                                      signed=from_records([(record, "poly2")], 0.95)[0])],
                  ledger.Identity("ana", "ana", "host"))
    held = next(r for r in read_results(folder / "r1.json")[1] if r["key"] != record["key"])
    ledger.append(book, [ledger.Entry(series=held["key"], action="hold", fingerprint=held["fingerprint"],
                                      results="ab" * 32, model=None, proposed=held["chosen"], note="ask the buyer")],
                  ledger.Identity("ana", "ana", "host"))
    write_weeks(folder / "c2.csv", 44, seed=11)
    assert main(["fit", str(folder / "c2.csv"), *COMMON, "-o", str(folder / "r2.json"), "--ledger", str(book)]) == 0
    assert main(["ledger", "carry", str(folder / "r2.json"), "--ledger", str(book), "--analyst", "bo", "-q"]) == 0
    assert histories(book)[record["key"]["product"]].current["action"] == "carry"
    return book, record["key"], folder / "c2.csv", folder / "r2.json"


def quadratic_at_plan(data, product: str) -> dict:
    """statsmodels OLS of volume on 1, price, price² over the series' rows: the prediction at the plan price,
    its 95% prediction interval and the point elasticity there (the outside reference)."""
    import pandas as pd
    import statsmodels.api as sm
    rows = pd.read_csv(data)
    rows = rows[rows["product"] == product]
    price, volume = rows["price"].to_numpy(float), rows["volume"].to_numpy(float)
    fit = sm.OLS(volume, np.column_stack([np.ones_like(price), price, price ** 2])).fit()
    frame = fit.get_prediction(np.array([[1.0, PLAN, PLAN ** 2]])).summary_frame(alpha=0.05)
    mean = float(frame["mean"].iloc[0])
    b = fit.params
    return {"volume": mean, "lo": float(frame["obs_ci_lower"].iloc[0]), "hi": float(frame["obs_ci_upper"].iloc[0]),
            "elasticity": (b[1] + 2 * b[2] * PLAN) * PLAN / mean}


@pytest.fixture(scope="module")
def carried(tmp_path_factory):
    return carried_override(tmp_path_factory.mktemp("carried"))


def test_a_carried_override_stays_overridden(carried):
    from fitcore.results.read import read_results
    book, key, _, results = carried
    record = next(r for r in read_results(results)[1] if r["key"] == key)
    history = histories(book)[key["product"]]
    assert history.status(record["fingerprint"]) == "overridden"
    assert history.decision["action"] == "override" and history.decision["note"] == NOTE
    assert history.carried is history.decision and history.current["model"] == "poly2"


def test_the_proposal_may_replace_a_carried_override(carried, tmp_path):
    """Only an accept carried is "already accepted": accepting the proposal over a carried override is a
    change of model, recorded as any accept over an override."""
    from fitcore.results.read import read_results
    book, key, _, results = carried
    copy = tmp_path / "ledger.jsonl"
    copy.write_bytes(book.read_bytes())
    record = next(r for r in read_results(results)[1] if r["key"] == key)
    latest = histories(copy)[key["product"]].latest
    ledger.append(copy, [ledger.Entry(series=key, action="accept", fingerprint=record["fingerprint"],
                                      results="ab" * 32, model="poly1", proposed="poly1",
                                      supersedes=latest["digest"])], ledger.Identity("cy", "cy", "host"))
    history = histories(copy)[key["product"]]
    assert history.status(record["fingerprint"]) == "accepted" and history.current["model"] == "poly1"
    with pytest.raises(ledger.LedgerError, match="already accepted on this data"):
        ledger.append(copy, [ledger.Entry(series=key, action="accept", fingerprint=record["fingerprint"],
                                          results="ab" * 32, model="poly1", proposed="poly1",
                                          supersedes=history.latest["digest"])], ledger.Identity("cy", "cy", "host"))


def test_export_says_a_carried_override_with_whose_decision_it_carries(carried, tmp_path):
    book, key, data, results = carried
    out = tmp_path / "plan-models.csv"
    assert main(["ledger", "export", str(book), "--results", str(results), "-o", str(out)]) == 0
    rows = list(csv.DictReader(open(out, newline="")))
    row = next(r for r in rows if r["product"] == key["product"])
    history = histories(book)[key["product"]]
    override, carry = history.decision, history.current
    assert (row["status"], row["model"], row["family"]) == ("overridden", "poly2", "poly")
    assert (row["analyst"], row["at"], row["note"]) == ("bo", carry["at"], "")  # the standing record: the carry
    assert row["carried_from"] == f"{override['seq']}:{override['digest']}"
    assert (row["carried_analyst"], row["carried_at"], row["carried_note"]) == ("ana", override["at"], NOTE)
    reference = quadratic_at_plan(data, key["product"])  # statsmodels OLS get_prediction
    for name in ("volume", "lo", "hi"):
        assert float(row[f"plan_{name}"]) == pytest.approx(reference[name], rel=1e-9)
    # the others are pending or held on the first cycle's data: nothing carried, nothing said
    others = [r for r in rows if r["product"] != key["product"]]
    assert {r["status"] for r in others} == {"pending", "stale"}
    assert all(r["carried_from"] == r["carried_analyst"] == r["carried_at"] == r["carried_note"] == "" for r in others)


def test_show_says_why_a_held_series_has_no_backtest(carried, capsys):
    """A hold signs no curve: there is nothing to backtest, though the results were fitted with --ledger."""
    book, key, _, results = carried
    capsys.readouterr()
    assert main(["show", str(results), "--ledger", str(book)]) == 0
    lines = capsys.readouterr().out.splitlines()
    held = next(line for line in lines if line.startswith(HELD + " "))
    assert " stale " in held and "new look (held)" in held and "no backtest" not in held
    carried_row = next(line for line in lines if line.startswith(key["product"] + " "))
    assert " overridden (carried) " in carried_row
    assert main(["show", str(results), "--ledger", str(book), "--product", HELD]) == 0
    out = capsys.readouterr().out
    assert "ledger: stale — due: a new look (a hold has no curve to backtest)" in out and "fit with" not in out


@pytest.mark.parametrize("engine", ["local", "dask"])
def test_fit_with_a_missing_ledger_is_an_error(tmp_path, capsys, engine):
    """A mistyped ledger name is one line and exit 2, not "no signed series has new data"; nothing is written."""
    write_weeks(tmp_path / "c1.csv", 40, seed=11)
    missing = tmp_path / "decisons.jsonl"
    out = tmp_path / ("r" if engine == "dask" else "r.json")
    capsys.readouterr()
    assert main(["fit", str(tmp_path / "c1.csv"), *COMMON, "-o", str(out), "--ledger", str(missing),
                 "--engine", engine]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and f"{missing}: no such ledger" in err and "Traceback" not in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c1.csv"]


def test_carry_to_a_missing_ledger_is_an_error_and_makes_none(tmp_path, capsys):
    write_weeks(tmp_path / "c1.csv", 40, seed=11)
    book = tmp_path / "ledger.jsonl"
    book.touch()  # an empty ledger: fit --ledger reads it
    assert main(["fit", str(tmp_path / "c1.csv"), *COMMON, "-o", str(tmp_path / "r.json"), "--ledger", str(book)]) == 0
    book.unlink()  # gone (or mistyped) by the time of the carry
    capsys.readouterr()
    assert main(["ledger", "carry", str(tmp_path / "r.json"), "--ledger", str(book)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and f"{book}: no such ledger" in err
    assert not book.exists()


def test_the_report_counts_a_carried_override_as_overridden(carried, tmp_path):
    book, key, _, results = carried
    page = tmp_path / "report.html"
    assert main(["report", str(results), "--ledger", str(book), "-o", str(page)]) == 0
    html = page.read_text()
    assert '<span class="n">1</span>overridden</li>' in html and '<span class="n">0</span>accepted</li>' in html
    assert "carried)</li>" not in html  # no accept was carried


def test_show_gives_the_standing_override_with_its_own_numbers(carried, capsys):
    """The override stands, not the proposal: show --ledger names it, with its plan numbers (statsmodels OLS
    get_prediction of the quadratic on the series' rows), and the list's model column says it (↺)."""
    from pricefold.show import number
    book, key, data, results = carried
    capsys.readouterr()
    assert main(["show", str(results), "--ledger", str(book), "--product", key["product"]]) == 0
    out = capsys.readouterr().out
    reference = quadratic_at_plan(data, key["product"])
    (line,) = [text.strip() for text in out.splitlines() if text.strip().startswith("stands: ")]
    assert line.startswith("stands: poly2, overridden by ana at ")
    assert (f"volume {number(reference['volume'])} ({number(reference['lo'])} to {number(reference['hi'])}), "
            f"elasticity {reference['elasticity']:.2f}") in line
    assert main(["show", str(results), "--ledger", str(book)]) == 0
    row = next(text for text in capsys.readouterr().out.splitlines() if text.startswith(key["product"] + " "))
    assert " poly2↺ " in row


def test_carry_counts_a_held_series_among_those_left(carried, capsys):
    book, _, _, results = carried
    before = book.read_bytes()
    capsys.readouterr()  # carried already: this run records nothing, and says what is left
    assert main(["ledger", "carry", str(results), "--ledger", str(book), "--analyst", "bo"]) == 0
    assert book.read_bytes() == before
    left = next(line for line in capsys.readouterr().err.splitlines() if line.startswith("left for a human: "))
    held = sum(1 for history in histories(book).values() if history.current["action"] == "hold")
    # in show's words for the same series ("held 1" beside show's "new look (held)" read as two things)
    assert held == 1 and left == f"left for a human: {held} (new look (held) {held})"
    assert main(["show", str(results), "--ledger", str(book)]) == 0
    row = next(line for line in capsys.readouterr().out.splitlines() if line.startswith(HELD + " "))
    assert " new look (held) " in row


def test_signing_into_a_mistyped_ledger_is_refused(carried, tmp_path, capsys):
    """Results fitted against a ledger name it: accept-unflagged will not start a new ledger elsewhere (a
    mistyped --ledger).  The triage screen names both ledgers on its header (``tests/tui/test_fitted_ledger.py``)."""
    book, _, _, results = carried
    missing = tmp_path / "ledgr.jsonl"
    capsys.readouterr()
    assert main(["ledger", "accept-unflagged", str(results), "--ledger", str(missing), "--analyst", "cy"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "no such ledger" in err and str(book) in err and not missing.exists()


def test_show_lists_the_model_the_export_gives(carried, tmp_path, capsys):
    """The list's model column is the signed model wherever a decision stands (stale ones too), as the export
    gives it; else this cycle's proposal."""
    from fitcore.results.read import read_results
    book, _, _, results = carried
    out = tmp_path / "e.csv"
    assert main(["ledger", "export", str(book), "--results", str(results), "-o", str(out)]) == 0
    exported = {row["product"]: row["model"] for row in csv.DictReader(open(out, newline=""))}
    proposals = {r["key"]["product"]: r["chosen"] for r in read_results(results)[1]}
    capsys.readouterr()
    assert main(["show", str(results), "--ledger", str(book)]) == 0
    for line in capsys.readouterr().out.splitlines()[1:]:
        product = next(p for p in exported if line.startswith(p + " "))
        shown = line[len(product):].split()[1].rstrip("↺")
        assert shown == (exported[product] or proposals[product]), line


def test_what_show_says_is_due_is_why_carry_leaves_it(tmp_path, capsys):
    """An override (poly2 over the proposal poly1) whose next cycle plans a price outside the observed ones: the
    proposal never changed, the stop flag is what keeps it from being carried.  ``show --ledger`` must say the
    reason carry counts it under — one rule for both — and over every series the reasons show gives are the
    counts carry prints."""
    from collections import Counter

    from fitcore.ledger.snapshot import from_records
    from fitcore.results.read import read_results
    from pricefold.cycle_cli import ledger_state
    from pricefold.ledger_cli import open_ledger
    book = tmp_path / "ledger.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=11)
    common = [c for c in COMMON if c not in ("--plan-price", str(PLAN))]
    assert main(["fit", str(tmp_path / "c1.csv"), *COMMON, "-o", str(tmp_path / "r1.json")]) == 0
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    record = next(r for r in read_results(tmp_path / "r1.json")[1] if r["chosen"] == "poly1" and not r["flags"])
    latest = histories(book)[record["key"]["product"]].latest
    ledger.append(book, [ledger.Entry(series=record["key"], action="override", fingerprint=record["fingerprint"],
                                      results="ab" * 32, model="poly2", proposed="poly1", note=NOTE,
                                      supersedes=latest["digest"], signed=from_records([(record, "poly2")], 0.95)[0])],
                  ledger.Identity("ana", "ana", "host"))
    product = record["key"]["product"]
    (tmp_path / "plan.csv").write_text("product,plan_price\n" + "".join(
        f"item {i},{2.65 if f'item {i}' == product else PLAN}\n" for i in range(8)))
    write_weeks(tmp_path / "c2.csv", 44, seed=11)
    assert main(["fit", str(tmp_path / "c2.csv"), *common, "--plan", str(tmp_path / "plan.csv"),
                 "-o", str(tmp_path / "r2.json"), "--ledger", str(book)]) == 0
    records = read_results(tmp_path / "r2.json")[1]
    mine = next(r for r in records if r["key"] == record["key"])
    assert mine["chosen"] == "poly1" and mine["backtest"]["status"] == "passed"
    assert "outside-range" in {f["code"] for f in mine["flags"]}
    capsys.readouterr()
    assert main(["show", str(tmp_path / "r2.json"), "--ledger", str(book), "--product", product]) == 0
    assert "ledger: stale — due: stop flag (outside-range)" in capsys.readouterr().out
    reader = open_ledger(book)
    said = Counter(ledger_state(r, reader)[1] for r in records if r.get("backtest"))
    said = Counter({why.split(" (")[0]: n for why, n in said.items() if why != "backtest passed"})
    capsys.readouterr()
    assert main(["ledger", "carry", str(tmp_path / "r2.json"), "--ledger", str(book)]) == 0
    left = next(line for line in capsys.readouterr().err.splitlines() if line.startswith("left for a human: "))
    counted = Counter({" ".join(part.split()[:-1]): int(part.split()[-1])
                       for part in left[left.index("(") + 1:-1].split(" · ")})
    assert counted == said and counted["stop flag"] >= 1


def test_a_carried_override_at_a_new_plan_price_says_which_number_is_which(tmp_path, capsys):
    """The plan moves the price (2.30 → 2.50) between cycles: `show` gave the carried refit's volume ("stands") and
    the curve as signed at the new price ("the signed curve gives") as two numbers for one series, neither saying
    which it was.  Each line now says it: the refit on these data (statsmodels OLS on the second cycle's rows) and
    the curve as signed (numpy's polyval of the signed coefficients)."""
    import statsmodels.api as sm
    import pandas as pd
    from fitcore.ledger.snapshot import from_records
    from fitcore.results.read import read_results
    from fitcore.review.sentences import fmt
    from pricefold.show import number
    book = tmp_path / "ledger.jsonl"
    options = ["--date", "week", "--degrees", "1-2", "--no-loglog", "--quiet"]
    write_weeks(tmp_path / "c1.csv", 40, seed=11)
    assert main(["fit", str(tmp_path / "c1.csv"), *options, "--plan-price", "2.3",
                 "-o", str(tmp_path / "r1.json")]) == 0
    record = next(r for r in read_results(tmp_path / "r1.json")[1] if r["chosen"] == "poly1" and not r["flags"])
    ledger.append(book, [ledger.Entry(series=record["key"], action="override", fingerprint=record["fingerprint"],
                                      results="ab" * 32, model="poly2", proposed="poly1", note=NOTE,
                                      signed=from_records([(record, "poly2")], 0.95)[0])],
                  ledger.Identity("ana", "ana", "host"))
    write_weeks(tmp_path / "c2.csv", 44, seed=11)
    assert main(["fit", str(tmp_path / "c2.csv"), *options, "--plan-price", "2.5", "-o", str(tmp_path / "r2.json"),
                 "--ledger", str(book)]) == 0
    assert main(["ledger", "carry", str(tmp_path / "r2.json"), "--ledger", str(book), "--analyst", "bo", "-q"]) == 0
    capsys.readouterr()
    assert main(["show", str(tmp_path / "r2.json"), "--ledger", str(book), "--product", record["key"]["product"]]) == 0
    lines = [line.strip() for line in capsys.readouterr().out.splitlines()]
    stands = next(line for line in lines if line.startswith("stands: "))
    since = next(line for line in lines if line.startswith("since sign-off"))
    rows = pd.read_csv(tmp_path / "c2.csv")
    rows = rows[rows["product"] == record["key"]["product"]]
    price = rows["price"].to_numpy(float)
    fit = sm.OLS(rows["volume"].to_numpy(float), np.column_stack([np.ones_like(price), price, price ** 2])).fit()
    refit = float(fit.predict(np.array([[1.0, 2.5, 6.25]]))[0])
    assert ", carried by bo at " in stands
    assert f"; its refit on these data at the plan price 2.50: volume {number(refit)} (" in stands
    signed = histories(book)[record["key"]["product"]].decision["signed"]  # ana's override as she signed it
    as_signed = float(np.polyval(signed["coef"][::-1], 2.5))
    assert since.startswith("since sign-off (the curve as signed): Signed ")
    assert f"at this plan's price 2.50 the signed curve gives {fmt(as_signed)} (" in since
    assert number(refit) != fmt(as_signed)  # two numbers for one series: why each must say what it is
    # elasticities in one format on the block: two decimals ("+0.0831" read beside "elasticity -1.60")
    import re
    said = re.findall(r"elasticity (?:differs by )?([+−-]?\d+\.\d+)", stands + " " + since)
    assert len(said) == 2 and all(len(x.split(".")[1]) == 2 for x in said), said
