"""What ``show``, ``ledger export`` and ``report`` say beside the numbers at the plan price: an elasticity only
where price varied, a control's plan value outside its range said on the plan line, the settings (weighting,
controls, season) stated, the export's ``inside_range`` and ``flags`` columns (format 2), the revenue-best price
as the fitted curve's, and the caution naming what the fit holds fixed.

Invented series (a price slope of −200 a unit in each): a flat price, a control never varying with a plan value
for it, a price tied to a rival's price, one far-off high-influence week, an ordinary one.
"""
from __future__ import annotations

import csv
import hashlib
import json
import re
from pathlib import Path

import numpy as np
import pytest

from fitcore import ledger
from fitcore.outputs.guard import _export_shaped, is_own
from fitcore.outputs.seal import seal_file
from pricefold.cli import main

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    folder = tmp_path_factory.mktemp("words")
    rng = np.random.default_rng(11)
    rows = ["product,week,price,volume,disp,rival"]

    def add(name, price, volume, disp, rival):
        for i, (p, v, d, r) in enumerate(zip(price, volume, disp, rival)):
            day = np.datetime64("2024-01-01") + np.timedelta64(7 * i, "D")
            rows.append(f"{name},{day},{p:.4f},{v:.4f},{d},{r:.4f}")
    n = 60
    price = rng.uniform(1.5, 3.5, n)
    add("flat price", np.full(n, 2.5), 500 + rng.normal(0, 20, n), (rng.uniform(size=n) < 0.3).astype(int),
        rng.uniform(2, 4, n))
    price = rng.uniform(1.5, 3.5, n)
    rival = rng.uniform(2, 4, n)
    add("no display", price, 1000 - 200 * price + 20 * rival + rng.normal(0, 20, n), np.zeros(n, int), rival)
    price = rng.uniform(1.5, 3.5, n)
    disp = (rng.uniform(size=n) < 0.3).astype(int)
    add("plain", price, 1000 - 200 * price + 100 * disp + rng.normal(0, 20, n), disp, rng.uniform(2, 4, n))
    price = rng.uniform(1.5, 3.5, 40)
    price[3] = 9.0
    volume = 1000 - 200 * price + rng.normal(0, 20, 40)
    volume[3] = 600
    add("leverage point", price, volume, (rng.uniform(size=40) < 0.3).astype(int), rng.uniform(2, 4, 40))
    data = folder / "data.csv"
    data.write_text("\n".join(rows) + "\n")
    plan = folder / "plan.csv"
    plan.write_text("product,plan_price,disp\nflat price,2.5,\nno display,2.5,1\nplain,2.5,\nleverage point,2.5,\n")
    out = {}
    for suffix in ("json", "parquet"):
        out[suffix] = folder / f"results.{suffix}"
        assert main(["fit", str(data), "--date", "week", "--control", "disp", "--control", "rival", "--plan",
                     str(plan), "-o", str(out[suffix]), "--quiet"]) == 0
    document = json.loads(out["json"].read_text())
    entries = [ledger.Entry(series=r["key"], action="hold", fingerprint=r["fingerprint"],
                            results=ledger.results_digest(document), note="look again")
               for r in document["series"] if r["key"]["product"] == "plain"]
    ledger.append(folder / "ledger.jsonl", entries, ledger.Identity("ana", "ana", "h"))
    return folder, out


def shown(capsys, results, product) -> str:
    capsys.readouterr()
    assert main(["show", str(results), "--product", product]) == 0
    return capsys.readouterr().out


def test_show_says_no_elasticity_where_price_never_varied(made, capsys):
    text = shown(capsys, made[1]["json"], "flat price")
    assert "elasticity not estimable (price never varied in this series)" in text and "elasticity 0.00" not in text
    assert "price explains little" not in text


def test_show_says_a_control_outside_its_range_on_the_plan_line_and_its_effect_missing(made, capsys):
    text = shown(capsys, made[1]["json"], "no display")
    plan = next(line for line in text.splitlines() if line.startswith("plan price"))
    assert plan.endswith("— a control's plan value lies outside the values this series has seen (see outside-range)")
    flag = next(line for line in text.splitlines() if "outside-range:" in line)
    assert "its effect is not in the number" in flag and "extrapolation" not in flag


def test_show_says_the_fitted_curve_and_names_what_it_holds(made, capsys):
    text = shown(capsys, made[1]["json"], "leverage point")
    assert "revenue-maximising price of the fitted curve within the observed range: 9.00; the curve there rests on " \
           "one high-influence observation (influential-point)" in text
    assert "with the fitted curve poly" in text or "with the fitted curve loglog" in text
    assert "This fit holds disp and rival fixed;" in text
    assert "confound price with promotions, seasons and stock-outs" not in text


def read(path):
    with open(path, newline="", encoding="utf-8") as handle:
        header, *rows = list(csv.reader(handle))
    return header, {row[0]: dict(zip(header, row)) for row in rows}


def test_the_export_marks_extrapolations_and_leaves_an_unmeasured_elasticity_empty(made):
    folder, results = made
    said = {}
    for kind, path in results.items():
        out = folder / f"export_{kind}.csv"
        assert main(["ledger", "export", str(folder / "ledger.jsonl"), "--results", str(path), "-o", str(out),
                     "-q"]) == 0
        header, said[kind] = read(out)
        assert header[-3:] == ["ledger_head", "inside_range", "flags"]
    assert said["json"] == said["parquet"]  # the record reader and the column reader write the same rows
    rows = said["json"]
    assert rows["flat price"]["plan_elasticity"] == "" and rows["flat price"]["plan_volume"] != ""
    assert rows["leverage point"]["plan_elasticity"] != ""
    assert rows["no display"]["inside_range"] == "false" and "outside-range" in rows["no display"]["flags"].split()
    assert rows["plain"]["inside_range"] == "true"
    assert "influential-point" in rows["leverage point"]["flags"].split()


def test_an_export_of_format_1_is_still_pricefolds_own(made):
    """An export written before the two columns (its header ends at ``ledger_head``) is still recognised as an
    export, so a new export replaces it."""
    folder, results = made
    old = folder / "old.csv"
    assert main(["ledger", "export", str(folder / "ledger.jsonl"), "--results", str(results["json"]), "-o", str(old),
                 "-q"]) == 0
    header, rows = read(old)
    cut = header.index("ledger_head") + 1
    old.unlink()  # written again in format 1, sealed as pricefold sealed it then
    text = "\r\n".join(",".join(f'"{cell}"' for cell in [*header[:cut]]) if i == 0 else
                       ",".join(f'"{row[name]}"' for name in header[:cut])
                       for i, row in enumerate([{}, *rows.values()])) + "\r\n"
    old.write_bytes(text.encode())
    seal_file(old, hashlib.sha256(text.encode()).hexdigest())
    assert is_own(old, "export") and _export_shaped(old)
    assert main(["ledger", "export", str(folder / "ledger.jsonl"), "--results", str(results["json"]), "-o", str(old),
                 "-q"]) == 0


def test_the_report_states_the_controls_and_glosses_a_stop_flag(made):
    folder, results = made
    page = folder / "report.html"
    assert main(["report", str(results["json"]), "--ledger", str(folder / "ledger.jsonl"), "-o", str(page)]) == 0
    text = page.read_text()
    plain = re.sub(r"<[^>]+>", "", text)
    assert "Controlsdisp (0/1), rival; plan volumes hold them at disp 0 (a 0/1 control) unless the plan file " \
           "gives it; rival the series&#x27; mean unless the plan file gives it" in plain
    assert "outside-range (an extrapolation, or a control's effect not in the number)" in plain
    assert "not estimable" in plain


def test_the_report_writes_a_volume_and_its_interval_in_one_format():
    from pricefold.report.page import alike, interval
    assert alike(666152270.0, 44196121.0, 1.29e9) == ["6.66e+08", "4.42e+07", "1.29e+09"]
    assert interval(44196121.0, 1.29e9, 666152270.0) == "4.42e+07–1.29e+09"
    assert alike(541.9, -63.75, 1147.6) == ["541.9", "−63.75", "1,148"]


def test_the_export_leaves_empty_the_elasticity_of_a_flat_curve_chosen_where_price_moved_with_a_control(tmp_path):
    """rival = 1.1 × price exactly: every curve with a price term is unavailable, poly0 is chosen, price-tied
    raised.  Before: the export wrote plan_elasticity 0.0, read downstream as measured (a new user's trial)."""
    rng = np.random.default_rng(5)
    rows = ["product,week,price,volume,rival"]
    for name, tied in (("tied", True), ("free", False), ("held", False)):
        price = rng.uniform(1.5, 3.5, 50)
        rival = 1.1 * price if tied else rng.uniform(2, 4, 50)
        volume = 1400 - 150 * price - 180 * rival + rng.normal(0, 15, 50)
        for i, (p, v, r) in enumerate(zip(price, volume, rival)):
            rows.append(f"{name},{np.datetime64('2024-01-01') + np.timedelta64(7 * i, 'D')},{p:.4f},{v:.4f},{float(r)!r}")
    data, results, out = tmp_path / "d.csv", tmp_path / "r.json", tmp_path / "e.csv"
    data.write_text("\n".join(rows) + "\n")
    assert main(["fit", str(data), "--date", "week", "--control", "rival", "--plan-price", "2.5", "-o", str(results),
                 "-q"]) == 0
    document = json.loads(results.read_text())
    held = [ledger.Entry(series=r["key"], action="hold", fingerprint=r["fingerprint"],
                         results=ledger.results_digest(document), note="look again")
            for r in document["series"] if r["key"]["product"] == "held"]  # (an export needs a ledger)
    ledger.append(tmp_path / "L.jsonl", held, ledger.Identity("ana", "ana", "h"))
    assert main(["ledger", "export", str(tmp_path / "L.jsonl"), "--results", str(results), "-o", str(out), "-q"]) == 0
    _, said = read(out)
    assert said["tied"]["model"] == "poly0" and "price-tied" in said["tied"]["flags"].split()
    assert said["tied"]["plan_elasticity"] == "" and said["tied"]["plan_volume"] != ""
    assert said["free"]["plan_elasticity"] not in ("", "0.0")


def test_the_export_leaves_empty_the_elasticity_of_every_flat_curve(tmp_path):
    """A flat curve's elasticity is 0 by its shape (the folds found no price effect worth a coefficient), not a
    measurement; the screen and show say so beside it.  Before: 0.0 where price moved and no control was tied,
    read downstream as "volume does not respond to price" (a trial: the sample's cherry tomatoes · South, whose
    prices span 1.35–2.25).  The sample's shipped results (a plan price for every series), an empty ledger."""
    import pyarrow.parquet as pq
    results = ROOT / "sample" / "results.parquet"
    chosen = pq.read_table(results, columns=["is_chosen", "candidate", "price_lo", "price_hi", "product", "region"])
    flat = [(row["product"], row["region"]) for row in chosen.to_pylist()
            if row["is_chosen"] and row["candidate"] == "poly0" and row["price_hi"] > row["price_lo"]]
    assert len(flat) >= 3  # flat curves chosen where price did move
    (tmp_path / "L.jsonl").write_bytes(b"")
    out = tmp_path / "e.csv"
    assert main(["ledger", "export", str(tmp_path / "L.jsonl"), "--results", str(results), "-o", str(out), "-q"]) == 0
    with open(out, newline="", encoding="utf-8") as handle:
        rows = {(row["product"], row["region"]): row for row in csv.DictReader(handle)}
    assert all(rows[key]["model"] == "poly0" and rows[key]["plan_elasticity"] == "" and rows[key]["plan_volume"]
               for key in flat)
    assert sum(row["plan_elasticity"] not in ("", "0.0") for row in rows.values()) > 100  # the others measured


def test_the_report_says_a_flat_curves_elasticity_is_not_measured(tmp_path):
    """The report printed 0.00 for a chosen poly0 where price moved (the sample's cherry tomatoes · South; a
    trial), where show and the screen say "the model's choice, not a measurement" and the export leaves it empty."""
    pytest.importorskip("matplotlib")
    (tmp_path / "L.jsonl").write_bytes(b"")
    page = tmp_path / "r.html"
    assert main(["report", str(ROOT / "sample" / "results.parquet"), "--ledger", str(tmp_path / "L.jsonl"), "-o",
                 str(page)]) == 0
    text = page.read_text()
    cells = re.findall(r'data-label="Elasticity">(.*?)</td>', text)  # the decisions table's rows shown
    cells += re.findall(r'<td class="num" data-label="elasticity">(.*?)</td>', text)  # each candidate in the cards
    flat = [cell for cell in cells if cell.endswith(">flat</span>") and "not a measurement" in cell]
    assert len(flat) >= 3 and not any(re.fullmatch(r"[−-]?0\.00", cell) for cell in cells)
