"""The ``pricefold fit`` command: results format, plan prices and one-line errors."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest

from pricefold.cli import main

SAMPLE = Path(__file__).parents[2] / "sample"


@pytest.fixture(scope="module")
def sample_json(tmp_path_factory):
    out = tmp_path_factory.mktemp("fit") / "results.json"
    code = main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week",
                 "--plan", str(SAMPLE / "plan.csv"), "-o", str(out), "--quiet"])
    assert code == 0
    return json.loads(out.read_text())


def test_results_carry_the_documented_fields(sample_json):
    doc = sample_json
    assert doc["schema"] == "pricefold-results/1"
    assert doc["settings"]["folds"] == 5 and doc["settings"]["rule"] == "one-se"
    assert doc["input"]["rows"] == 18625 and doc["input"]["rejected"] == 0 and len(doc["input"]["sha256"]) == 64
    assert len(doc["series"]) == 180
    series = doc["series"][0]
    assert set(series) >= {"key", "n", "price_range", "candidates", "chosen", "rule", "score", "flags",
                           "plan", "fingerprint"}
    assert series["key"] == {"product": "apples 1 kg", "region": "North"}
    names = [c["name"] for c in series["candidates"]]
    assert names == ["poly0", "poly1", "poly2", "poly3", "poly4", "poly5", "loglog"]
    for cand in series["candidates"]:
        assert set(cand) >= {"name", "family", "degree", "available", "reason", "cv_mse", "cv_se", "fold_mse",
                             "r2", "q2", "coef"}
        if cand["available"] and cand["family"] == "poly":
            assert len(cand["coef"]) == cand["degree"] + 1 and len(cand["fold_mse"]) == 5
            np.testing.assert_allclose(np.mean(cand["fold_mse"]), cand["cv_mse"], rtol=1e-12)


def test_power_basis_coefficients_reproduce_the_plan_volume(sample_json):
    """volume = Σ coef[i]·priceⁱ (poly) and a + e·ln price (loglog), as the README says."""
    checked = 0
    for series in sample_json["series"]:
        plan = series["plan"]
        chosen = next((c for c in series["candidates"] if c["name"] == series["chosen"]), None)
        if plan is None or chosen is None:
            continue
        p = plan["price"]
        if chosen["family"] == "poly":
            volume = sum(c * p ** i for i, c in enumerate(chosen["coef"]))
        else:
            a, e = chosen["coef"]
            volume = np.exp(a + e * np.log(p)) * chosen["smearing"]
        np.testing.assert_allclose(volume, plan["volume"], rtol=1e-8)
        assert plan["lo"] <= plan["volume"] <= plan["hi"]
        checked += 1
    assert checked > 150


def test_awkward_sample_series_are_marked(sample_json):
    by_key = {(s["key"]["product"], s["key"]["region"]): s for s in sample_json["series"]}
    figs = by_key[("fresh figs 500 g", "North")]
    loglog = figs["candidates"][-1]
    assert not loglog["available"] and "above zero" in loglog["reason"]
    flour = by_key[("flour 1 kg", "South")]
    assert [c["available"] for c in flour["candidates"][2:6]] == [False] * 4
    assert "2 distinct prices" in flour["candidates"][2]["reason"]
    apricots = by_key[("dried apricots 500 g", "East")]
    assert apricots["plan"]["inside_range"] is False


def test_parquet_results_hold_the_same_numbers(tmp_path, sample_json):
    out = tmp_path / "results.parquet"
    assert main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week",
                 "--plan", str(SAMPLE / "plan.csv"), "-o", str(out), "--quiet"]) == 0
    table = pq.read_table(out)
    meta = json.loads(table.schema.metadata[b"pricefold"])
    assert meta["schema"] == "pricefold-results/1" and meta["key_columns"] == ["product", "region"]
    assert table.num_rows == 180 * 7
    rows = table.to_pylist()
    for s, series in enumerate(sample_json["series"][:20]):
        for c, cand in enumerate(series["candidates"]):
            row = rows[s * 7 + c]
            assert (row["product"], row["region"], row["candidate"]) == (series["key"]["product"],
                                                                         series["key"]["region"], cand["name"])
            assert row["available"] == cand["available"] and row["chosen"] == series["chosen"]
            if cand["available"]:
                np.testing.assert_allclose(row["coef"], cand["coef"], rtol=1e-15)
                np.testing.assert_allclose(row["fold_mse"], cand["fold_mse"], rtol=1e-15)
            else:
                assert row["coef"] == [] and row["reason"] == cand["reason"]


def test_same_seed_same_results_other_seed_other_folds(tmp_path):
    args = ["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--quiet"]
    outs = []
    for seed, name in ((0, "a"), (0, "b"), (1, "c")):
        out = tmp_path / f"{name}.json"
        assert main([*args, "--seed", str(seed), "-o", str(out)]) == 0
        outs.append(json.loads(out.read_text())["series"])
    assert outs[0] == outs[1]
    assert outs[0][0]["candidates"][1]["fold_mse"] != outs[2][0]["candidates"][1]["fold_mse"]


def run_cli(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "pricefold", *args], capture_output=True, text=True, cwd=cwd)


def test_header_typo_is_one_line_naming_file_column_and_suggestion(tmp_path):
    bad = tmp_path / "typo.csv"
    bad.write_text("product,prcie,volume\na,1.0,3\n")
    out = tmp_path / "r.json"
    done = run_cli("fit", str(bad), "-o", str(out))
    assert done.returncode == 2
    assert done.stderr.count("\n") == 1 and "Traceback" not in done.stderr
    assert "typo.csv" in done.stderr and "'price'" in done.stderr and "did you mean 'prcie'" in done.stderr
    assert not out.exists()


def test_non_numeric_cell_is_rejected_with_its_line_or_fails_when_strict(tmp_path):
    bad = tmp_path / "junk.csv"
    bad.write_text("product,price,volume\n" + "".join(f"a,{1 + i / 10},{30 - i}\n" for i in range(12)) + "a,2.0,lots\n")
    done = run_cli("fit", str(bad), "-o", str(tmp_path / "r.json"))
    assert done.returncode == 0, done.stderr
    assert f"1 row rejected: 1 non-numeric volume — see {tmp_path / 'r.rejects.csv'}" in done.stderr
    assert (tmp_path / "r.rejects.csv").read_text() == "product,price,volume,line,reason\na,2.0,lots,14,non-numeric volume\n"
    strict = run_cli("fit", str(bad), "-o", str(tmp_path / "s.json"), "--strict")
    assert strict.returncode == 2 and "Traceback" not in strict.stderr and strict.stderr.count("\n") == 1
    assert ("junk.csv, line 14, column 'volume': non-numeric volume: 'lots'" in strict.stderr
            and not (tmp_path / "s.json").exists())


@pytest.mark.parametrize("args, message", [
    (["--folds", "1"], "expected --folds to be a whole number of at least 2 or 'loo', got 1"),
    (["--degrees", "2-9"], "expected --degrees to be whole numbers from 0 to 5"),
    (["--fold-order", "time"], "needs the date column"),
    (["--plan-price", "-3"], "expected --plan-price to be a number above zero, got -3"),
    (["--plan-price", "inf"], "expected --plan-price to be a price of at most 1e15, got inf"),
    (["--plan-price", "nan"], "expected --plan-price to be a number above zero, got nan"),
    # the longest series of the sample by product has 312 rows (3 regions × 104 weeks); a billion folds asked numpy for 44.7 GiB (a trial)
    # the data file given as the plan too: said as such, not "did you mean 'price'?" (a trial)
    (["--plan", str(SAMPLE / "wholesale.csv")], "a plan file holds the series' keys and a 'plan_price' column: is "
                                                "this the data file?"),
    (["--folds", "313"], "--folds 313 is more folds than the longest series has rows (312)"),
    (["--folds", "1000000000"], "--folds 1,000,000,000 is more folds than the longest series has rows (312)"),
])
def test_bad_settings_are_one_line(tmp_path, args, message):
    done = run_cli("fit", str(SAMPLE / "wholesale.csv"), "-o", str(tmp_path / "r.json"), *args)
    assert done.returncode == 2 and message in done.stderr and "Traceback" not in done.stderr
    assert done.stderr.count("\n") == 1 and not (tmp_path / "r.json").exists()


def test_missing_file_and_unknown_extension(tmp_path):
    done = run_cli("fit", str(tmp_path / "nope.csv"), "-o", str(tmp_path / "r.json"))
    assert done.returncode == 2 and "nope.csv: file not found" in done.stderr
    odd = tmp_path / "data.xlsx"
    odd.write_bytes(b"PK\x03\x04")
    done = run_cli("fit", str(odd), "-o", str(tmp_path / "r.json"))
    assert done.returncode == 2 and "expected a .csv" in done.stderr


def test_a_failed_run_keeps_the_previous_results(tmp_path):
    out = tmp_path / "r.json"
    out.write_text('{"kept": true}')
    bad = tmp_path / "bad.csv"
    bad.write_text("product,price,volume\na,1.0,-3\n")
    assert run_cli("fit", str(bad), "-o", str(out)).returncode == 2
    assert out.read_text() == '{"kept": true}'


def test_a_results_file_edited_or_written_by_hand_is_not_replaced(tmp_path, capsys):
    """A trial added a note to a JSON results file, then fitted again to its name: the note was gone without a word;
    a file of one's own starting with the results' schema marker was replaced too.  Only a results file pricefold
    wrote and nobody changed since is replaced, as for an export (its seal: its SHA-256 beside its bytes)."""
    from fitcore.outputs.seal import seal_state
    out, data = tmp_path / "r.json", SAMPLE / "wholesale.csv"
    fit = ["fit", str(data), "--segment", "region", "-o", str(out), "-q"]
    assert main(fit) == 0
    if seal_state(out) is None:
        pytest.skip("no extended attributes on this file system: a JSON results file is judged by its marker")
    assert seal_state(out) == "intact" and main(fit) == 0  # its own, unchanged: replaced
    doc = json.loads(out.read_text())
    doc["my_notes"] = "keep me"
    with open(out, "w") as handle:  # edited in place, as json.dump into the same name does
        json.dump(doc, handle)
    before = out.read_bytes()
    capsys.readouterr()
    assert main(fit) == 2 and out.read_bytes() == before
    assert capsys.readouterr().err.strip().endswith(
        "exists and is not a pricefold results file (changed since it was written); pricefold replaces only its own "
        "earlier output (remove it or choose another name)")
    mine = tmp_path / "mine.json"
    mine.write_text('{"schema": "pricefold-results/1", "note": "my own file"}')
    assert main(["fit", str(data), "--segment", "region", "-o", str(mine), "-q"]) == 2
    assert json.loads(mine.read_text())["note"] == "my own file"


def test_q_is_the_short_form_of_quiet(tmp_path, capsys):
    """``-q`` silences the summary exactly as ``--quiet`` does; without either the summary is printed (every
    column read: a note of one unread is a warning, kept)."""
    args = ["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week", "--control", "promo"]
    assert main([*args, "-o", str(tmp_path / "loud.json")]) == 0
    assert "fitted 180 series" in capsys.readouterr().err
    for flag in ("-q", "--quiet"):
        assert main([*args, "-o", str(tmp_path / f"{flag.strip('-')}.json"), flag]) == 0
        quiet = capsys.readouterr()
        assert quiet.out == "" and quiet.err == "", flag


def test_parquet_flags_are_the_json_results_flags(tmp_path, sample_json):
    """The Parquet writer builds each series' flags text flag by flag over all series at once; it must be
    exactly the JSON that ``json.dumps`` writes for the series' list in the JSON results."""
    out = tmp_path / "results.parquet"
    assert main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week",
                 "--plan", str(SAMPLE / "plan.csv"), "-o", str(out), "--quiet"]) == 0
    flags = pq.read_table(out, columns=["flags"]).column("flags").to_pylist()[::7]
    expected = [json.dumps(series["flags"], ensure_ascii=False) for series in sample_json["series"]]
    assert flags == expected and sum(text != "[]" for text in flags) > 20


@pytest.mark.parametrize("name", ["family", "n", "flags"])
def test_a_key_column_named_like_a_results_column_is_refused_for_parquet(tmp_path, capsys, name):
    """A segment named 'family' was overwritten by the results' own 'family' column in Parquet (every series of
    a product then had one key, 'poly'); JSON keeps keys apart and takes it as it is."""
    import csv
    rows = list(csv.reader((SAMPLE / "wholesale.csv").open()))
    rows[0] = [name if column == "region" else column for column in rows[0]]
    data = tmp_path / "data.csv"
    with data.open("w", newline="") as out:
        csv.writer(out).writerows(rows)
    old = tmp_path / "r.parquet"
    assert main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "-o", str(old), "--quiet"]) == 0
    before = old.read_bytes()  # an earlier run's results: a failed run leaves them as they were
    capsys.readouterr()
    assert main(["fit", str(data), "--segment", name, "-o", str(old), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and f"column '{name}' is a key (product or segment) and also a column" in err
    assert old.read_bytes() == before
    assert main(["fit", str(data), "--segment", name, "-o", str(tmp_path / "r.json"), "--quiet"]) == 0
    keys = {tuple(s["key"].values()) for s in json.loads((tmp_path / "r.json").read_text())["series"]}
    assert len(keys) == 180 and {k[1] for k in keys} == {"North", "South", "East"}


def test_a_local_fit_runs_with_the_cyclic_collector_off_and_turns_it_back_on(tmp_path, monkeypatch):
    """The collector walked every module's objects again and again during numba's start and the imports
    beside the read (256 collections, 0.07 s CPU); a dask fit keeps it (a cluster's client lives long)."""
    import gc

    import pricefold.fit_run as fit_run
    seen = []
    monkeypatch.setattr(fit_run, "run_fit", lambda args: seen.append(gc.isenabled()) or 0)
    assert gc.isenabled()
    data, out = str(SAMPLE / "wholesale.csv"), str(tmp_path / "r.parquet")
    assert main(["fit", data, "-o", out, "-q"]) == 0
    assert main(["fit", data, "-o", out, "-q", "--engine", "dask"]) == 0
    assert seen == [False, True] and gc.isenabled()


def test_an_output_given_twice_or_a_file_named_as_a_folder_is_refused(tmp_path):
    """Before: ``-o a.json -o b.json`` wrote b.json (argparse keeps the last), and ``report -o page.html/`` (or
    ``ledger export``'s) wrote the file page.html."""
    done = run_cli("fit", str(SAMPLE / "wholesale.csv"), "-o", str(tmp_path / "a.json"), "-o", str(tmp_path / "b.json"))
    assert done.returncode == 2 and done.stderr.count("\n") == 1 and "-o given twice" in done.stderr
    done = run_cli("report", str(tmp_path / "r.json"), "-o", str(tmp_path / "page.html") + "/")
    assert done.returncode == 2 and "a path ending in a slash names a folder" in done.stderr
    assert not list(tmp_path.iterdir())


def test_a_results_file_saved_with_a_byte_order_mark_is_read(tmp_path, capsys):
    """A trial's JSON results saved by an editor that adds a BOM: 'could not read it as JSON (Unexpected UTF-8
    BOM …)' — data and plan files skip one; results files now too."""
    out = tmp_path / "r.json"
    assert main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "-o", str(out), "-q"]) == 0
    capsys.readouterr()
    assert main(["show", str(out), "--product", "apples 1 kg", "--key", "region=North"]) == 0
    plain = capsys.readouterr().out
    out.write_bytes(b"\xef\xbb\xbf" + out.read_bytes())
    assert main(["show", str(out), "--product", "apples 1 kg", "--key", "region=North"]) == 0
    assert capsys.readouterr().out == plain
