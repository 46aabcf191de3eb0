"""Flags on the sample scenario, the fit summary, and ``pricefold show``."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from fitcore.review.flags import CODES

SAMPLE = Path(__file__).parents[2] / "sample"


def run_cli(*args):
    return subprocess.run([sys.executable, "-m", "pricefold", *args], capture_output=True, text=True)


@pytest.fixture(scope="module")
def fitted(tmp_path_factory):
    folder = tmp_path_factory.mktemp("flags")
    out = {}
    for suffix in ("json", "parquet"):
        path = folder / f"results.{suffix}"
        done = run_cli("fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week",
                       "--plan", str(SAMPLE / "plan.csv"), "-o", str(path))
        assert done.returncode == 0, done.stderr
        out[suffix] = (path, done.stderr)
    return out


def test_sample_shows_every_flag_and_mostly_clean_series(fitted):
    path, _ = fitted["json"]
    series = json.loads(path.read_text())["series"]
    seen = {f["code"] for s in series for f in s["flags"]}
    # stale and shifted come from the ledger, price-tied from a fit with controls (tests/cli/test_controls_cli.py),
    # no-model from values too large for the arithmetic (tests/fitcore/test_huge_values.py)
    assert seen == set(CODES) - {"stale", "price-tied", "shifted", "no-model"}
    clean = sum(not s["flags"] for s in series)
    assert clean / len(series) >= 0.60
    for s in series:
        for f in s["flags"]:
            assert f["severity"] in ("stop", "warn") and f["message"].endswith(".")


def test_thresholds_are_written_into_the_results(fitted):
    path, _ = fitted["json"]
    settings = json.loads(path.read_text())["settings"]
    assert settings["thresholds"]["min_points"] == 12 and settings["thresholds"]["cook_floor"] == 0.5


def test_summary_counts_series_by_flag(fitted):
    path, stderr = fitted["json"]
    series = json.loads(path.read_text())["series"]
    rising = sum(any(f["code"] == "rising" for f in s["flags"]) for s in series)
    clean = sum(not s["flags"] for s in series)
    assert f"rising {rising}" in stderr and f"{clean} series" in stderr and "carry none" in stderr


def test_threshold_option_changes_the_flags(tmp_path):
    out = tmp_path / "r.json"
    done = run_cli("fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "-o", str(out),
                   "--threshold", "min_points=5", "--quiet")
    assert done.returncode == 0
    series = json.loads(out.read_text())["series"]
    assert not any(f["code"] == "few-points" for s in series for f in s["flags"])
    bad = run_cli("fit", str(SAMPLE / "wholesale.csv"), "-o", str(out), "--threshold", "min_points")
    assert bad.returncode == 2 and "expected --threshold NAME=VALUE, got 'min_points'" in bad.stderr


@pytest.mark.parametrize("suffix", ["json", "parquet"])
def test_show_one_series_in_full(fitted, suffix):
    path, _ = fitted[suffix]
    done = run_cli("show", str(path), "--product", "lemons 500 g", "--key", "region=East")
    assert done.returncode == 0, done.stderr
    text = done.stdout
    assert text.startswith("lemons 500 g · East — 104 observations")
    assert "✓ poly1" in text and "[stop] below-zero" in text and "[stop] outside-range" in text
    assert "an extrapolation" in text and "the analyst decides" in text


def test_show_lists_flagged_series_in_order_of_attention(fitted):
    path, _ = fitted["json"]
    done = run_cli("show", str(path), "--flag", "flat-price")
    lines = done.stdout.strip().splitlines()
    assert lines[0].startswith("series") and len(lines) == 5
    assert all("flat-price" in line for line in lines[1:])


def test_show_orders_records_as_the_triage_list_orders_series(fitted):
    """One attention order: ``show`` on the written records and ``Diagnosis`` on the fit agree."""
    import fitcore
    from fitcore.data.loader import Columns, load
    from fitcore.data.plan import plan_prices
    from fitcore.review.flags import diagnose
    from pricefold.show import in_attention_order
    path, _ = fitted["json"]
    records = json.loads(path.read_text())["series"]
    data = load(SAMPLE / "wholesale.csv", Columns(segments=("region",), date="week"))
    diagnosis = diagnose(fitcore.fit_batch(data, plan_price=plan_prices(data, SAMPLE / "plan.csv")))
    assert len({len(r["flags"]) for r in records}) > 2  # stop and warn counts and scores all decide somewhere
    assert [r["key"] for r in in_attention_order(records)] == \
        [data.key_of(int(s)) for s in diagnosis.attention_order()]


def test_show_with_no_match_says_so(fitted):
    path, _ = fitted["json"]
    done = run_cli("show", str(path), "--product", "no such thing")
    assert done.returncode == 1 and "no series" in done.stderr


def test_show_prints_control_characters_harmlessly(tmp_path):
    data = tmp_path / "odd.csv"
    rows = "\n".join(f"\"bad\x1b[2Jname\",{1 + i % 7 / 10},{100 - i}" for i in range(30))
    data.write_text("product,price,volume\n" + rows + "\n")
    out = tmp_path / "odd.json"
    assert run_cli("fit", str(data), "-o", str(out), "--quiet").returncode == 0
    done = run_cli("show", str(out))
    assert "\x1b" not in done.stdout and "bad\u241b[2Jname" in done.stdout


def test_show_filters_a_parquet_results_file_as_it_reads_it(tmp_path, capsys):
    """Only the named series are read into records; the answer equals the JSON file's."""
    from pricefold.cli import main
    sample = Path(__file__).parents[2] / "sample"
    for name in ("r.json", "r.parquet"):
        assert main(["fit", str(sample / "wholesale.csv"), "--segment", "region", "-o", str(tmp_path / name),
                     "--quiet"]) == 0
    capsys.readouterr()
    shown = []
    for name in ("r.json", "r.parquet"):
        assert main(["show", str(tmp_path / name), "--product", "lemons 500 g", "--key", "region=East"]) == 0
        shown.append(capsys.readouterr().out)
    assert shown[0] == shown[1] and shown[0].startswith("lemons 500 g · East")
    assert main(["show", str(tmp_path / "r.parquet"), "--key", "aisle=3"]) == 2  # no such key column: said so


def test_an_unknown_flag_code_is_named_with_the_known_ones(fitted):
    """'--flag NARROW' matched nothing and said only that (exit 1): a typo looked like a clean file."""
    path, _ = fitted["parquet"]
    done = run_cli("show", str(path), "--flag", "narrow-range")
    assert done.returncode == 2 and done.stdout == ""
    assert done.stderr.strip() == (f"pricefold show: expected --flag to be one of {', '.join(CODES)}; "
                                   "got 'narrow-range'")


def test_a_long_product_name_gives_way_to_its_segments_in_a_list():
    """The list's 40-character column kept the name's first 40 characters and dropped the region."""
    from pricefold.show import key_cells, table

    def key_cell(key, width=40):
        return key_cells([key], width)[0].rstrip()
    record = {"n": 30, "chosen": "poly1", "score": 0.5, "flags": []}
    rows = table([{**record, "key": {"product": "x" * 500, "region": region}} for region in ("North", "South")])
    names = [line[:40] for line in rows.splitlines()[1:]]
    assert names == ["x" * 16 + "…" + "x" * 15 + " · North", "x" * 16 + "…" + "x" * 15 + " · South"]
    assert key_cell({"product": "lemons", "region": "East"}) == "lemons · East"
    assert key_cell({"product": "p", "region": "r" * 60}, 10) == "…" + "r" * 9
    # each part keeps a share and its ends: a long store beside long names that differ only at the end
    long = "extra long product description with many words 750 ml "
    cells = [key_cell({"product": long + end, "store": store})
             for end in ("bottle", "can") for store in ("S1", "north-east distribution centre 12")]
    assert cells == ["extra long produc…rds 750 ml bottle · S1", "extra lon…ml bottle · north-eas…entre 12",
                     "extra long product…words 750 ml can · S1", "extra lon…50 ml can · north-eas…entre 12"]


@pytest.mark.parametrize("suffix", ["json", "parquet"])
def test_a_key_column_the_results_do_not_have_is_named(fitted, suffix):
    """'--key store=3' on results keyed by product and region matched nothing and said only that."""
    path, _ = fitted[suffix]
    done = run_cli("show", str(path), "--key", "store=3")
    assert done.returncode == 2
    assert done.stderr.strip() == ("pricefold show: these results have no key column 'store'; their key columns: "
                                   "product, region")
    assert run_cli("show", str(path), "--key", "region=Atlantis").returncode == 1  # a value: no match, as before


def test_names_that_differ_only_in_a_control_character_print_apart(tmp_path):
    """``show``'s list and one series, and ``ledger show``, print ``line\\nbreak`` and ``line?break`` (and the
    tab pair) each as its own text: line feed and tab as their control pictures, '?' as itself."""
    import csv
    twins = {"line\nbreak": "line\u240abreak", "line?break": "line?break", "tab\there": "tab\u2409here",
             "tab?here": "tab?here"}
    data, out, book = tmp_path / "twins.csv", tmp_path / "twins.json", tmp_path / "twins.ledger.jsonl"
    with open(data, "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["product", "price", "volume"])
        writer.writerows([name, 1 + i % 7 / 10, 1000 - 100 * (i % 7) - i % 3] for name in twins for i in range(30))
    assert run_cli("fit", str(data), "-o", str(out), "--quiet").returncode == 0
    listed = run_cli("show", str(out)).stdout.splitlines()[1:]
    assert sorted(line.split()[0] for line in listed) == sorted(twins.values()), listed
    for name, shown in twins.items():
        one = run_cli("show", str(out), "--product", name).stdout
        assert one.startswith(f"{shown} — 30 observations"), one
    accepted = run_cli("ledger", "accept-unflagged", str(out), "--ledger", str(book), "--analyst", "ana", "-q")
    assert accepted.returncode == 0
    lines = run_cli("ledger", "show", str(book)).stdout.splitlines()
    assert sorted(line.split()[-1] for line in lines) == sorted(twins.values()), lines
