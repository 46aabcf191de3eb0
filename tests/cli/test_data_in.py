"""Data in through the command line: settings file precedence, weights, rejects and strict mode."""
from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

SAMPLE = Path(__file__).parents[2] / "sample"


def run_cli(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "pricefold", *args], capture_output=True, text=True, cwd=cwd,
                          env={**os.environ, "PYTHONPATH": str(Path(__file__).parents[2])})


def test_settings_file_fills_in_and_the_command_line_wins(tmp_path):
    (tmp_path / "pricefold.toml").write_text(
        '[columns]\nsegments = ["region"]\ndate = "week"\n\n[fit]\ndegrees = "0-2"\nfolds = 4\nrule = "lowest"\n'
        '\n[thresholds]\nmin_points = 200\n')
    out = tmp_path / "r.json"
    done = run_cli("fit", str(SAMPLE / "wholesale.csv"), "-o", str(out), "--folds", "3", "--quiet", cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    doc = json.loads(out.read_text())
    settings = doc["settings"]
    assert settings["degrees"] == [0, 1, 2] and settings["rule"] == "lowest"  # from the file
    assert settings["folds"] == 3  # the command line wins
    assert settings["columns"]["segments"] == ["region"] and settings["columns"]["date"] == "week"
    assert settings["thresholds"]["min_points"] == 200 and settings["config"].endswith("pricefold.toml")
    assert len(doc["series"]) == 180 and all(any(f["code"] == "few-points" for f in s["flags"]) for s in doc["series"])
    # found, not named: said (a trial's fit changed by a file in the folder without a word), even with --quiet
    assert f"note: settings from {tmp_path / 'pricefold.toml'} (the current folder's settings file" in done.stderr
    named = run_cli("fit", str(SAMPLE / "wholesale.csv"), "-o", str(out), "--config", str(tmp_path / "pricefold.toml"),
                    "--quiet", cwd=tmp_path)
    assert named.returncode == 0 and "settings from" not in named.stderr


@pytest.mark.parametrize("text, message", [
    ("[fit]\nfoldz = 3\n", "unknown key 'foldz' in [fit]; expected one of degrees, fold_order, folds"),
    ("[colums]\nprice = 'p'\n", "unknown table [colums]; expected one of [columns], [fit], [thresholds]"),
    ("[fit\n", "not valid TOML"),
    ("[fit]\nseed = 'seven'\n", "[fit] seed should be a whole number, got 'seven'"),
    ("[fit]\nloglog = 'no'\n", "[fit] loglog should be true or false, got 'no'"),
    ("[thresholds]\nmin_points = true\n", "[thresholds] min_points should be a whole number or a number, got True"),
])
def test_settings_file_mistakes_are_one_line(tmp_path, text, message):
    config = tmp_path / "settings.toml"
    config.write_text(text)
    done = run_cli("fit", str(SAMPLE / "wholesale.csv"), "-o", str(tmp_path / "r.json"), "--config", str(config))
    assert done.returncode == 2 and message in done.stderr and done.stderr.count("\n") == 1


def test_weights_column_is_used(tmp_path):
    data = tmp_path / "w.csv"
    rows = ["product,price,volume,w"] + [f"p,{1 + i / 20:.2f},{100 - 20 * i / 20 + (i % 3):.1f},{1 + i % 4}"
                                          for i in range(30)]
    data.write_text("\n".join(rows) + "\n")
    plain, weighted = tmp_path / "a.json", tmp_path / "b.json"
    assert run_cli("fit", str(data), "-o", str(plain), "--quiet").returncode == 0
    assert run_cli("fit", str(data), "-o", str(weighted), "--weight", "w", "--quiet").returncode == 0
    a = json.loads(plain.read_text())["series"][0]["candidates"][1]["coef"]
    b = json.loads(weighted.read_text())["series"][0]["candidates"][1]["coef"]
    assert a != b and json.loads(weighted.read_text())["settings"]["columns"]["weight"] == "w"


def test_rows_read_equal_fitted_plus_rejected(tmp_path):
    data = tmp_path / "d.csv"
    good = [f"p,{1 + i / 10:.1f},{50 - i}" for i in range(15)]
    data.write_text("product,price,volume\n" + "\n".join(good + ["p,-1,3", "p,2,x", "q,,4"]) + "\n")
    out = tmp_path / "r.json"
    done = run_cli("fit", str(data), "-o", str(out))
    assert done.returncode == 0
    assert "3 rows rejected: 1 negative price · 1 non-numeric volume · 1 missing price — see" in done.stderr
    doc = json.loads(out.read_text())
    assert doc["input"]["rows"] == 18 and doc["input"]["rejected"] == 3
    assert sum(s["n"] for s in doc["series"]) == 15
