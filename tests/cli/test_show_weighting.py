"""``pricefold show`` says a fit was weighted and what its interval is for; the report's settings say it too."""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

TRIAL = Path(__file__).resolve().parents[1] / "reference" / "zero_weights.csv.gz"
SAID = ("weighted by column w (weighted least squares: rows of weight 0 count for nothing; intervals are for a week "
        "weighing as much as its series' average row of positive weight)")


def run_cli(*args):
    return subprocess.run([sys.executable, "-m", "pricefold", *args], capture_output=True, text=True)


def test_show_says_the_weighting_beside_the_numbers(tmp_path):
    for weighted in (True, False):
        out = tmp_path / f"r{weighted}.json"
        done = run_cli("fit", str(TRIAL), "--segment", "region", "--date", "week", "--fold-order", "given",
                       *(["--weight", "w"] if weighted else []), "--plan-price", "2.4", "-q", "-o", str(out))
        assert done.returncode == 0, done.stderr
        shown = run_cli("show", str(out), "--product", "plinth gel", "--key", "region=Northmark")
        assert shown.returncode == 0, shown.stderr
        lines = shown.stdout.splitlines()
        assert (lines[1] == SAID) is weighted, lines[:3]
        assert "no-model" not in shown.stdout and "overflow" not in shown.stdout
