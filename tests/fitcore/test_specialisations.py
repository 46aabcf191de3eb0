"""Each compiled loop is compiled once, whatever its callers hand it.

numba compiles a loop once for every combination of its arguments' types (dtype, dimensions, layout,
and whether an array is writable), and each such version costs seconds of compiling on a fresh
install and a load from the cache in every later run that meets it.  Callers pass one type per
argument (``compiled.readonly``, ``basis._rows``), so one version serves them all.  Here: a fresh
process fits the sample (with and without weights, with controls and season terms, leave-one-out
with the semi-log family), draws one series' evidence as the triage screen does, then reads every
loop's compiled signatures from numba's dispatchers.
"""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

SAMPLE = Path(__file__).resolve().parents[2] / "sample"

RUN = r"""
import csv, json, sys
from pathlib import Path
import numpy as np
from pricefold.cli import main

sample, out = Path(sys.argv[1]), Path(sys.argv[2])
weighted = out / "weighted.csv"
with open(sample / "wholesale.csv", newline="") as src, open(weighted, "w", newline="") as dst:
    rows = csv.reader(src)
    write = csv.writer(dst)
    write.writerow(next(rows) + ["weight"])
    for i, row in enumerate(rows):
        write.writerow(row + [str(1 + i % 3)])
common = ["--segment", "region", "--date", "week", "--plan", str(sample / "plan.csv"), "-q"]
runs = [
    [str(sample / "wholesale.csv"), "-o", str(out / "plain.json")],
    [str(weighted), "--weight", "weight", "-o", str(out / "weighted.parquet")],
    [str(sample / "wholesale.csv"), "--control", "promo", "--season", "1", "-o", str(out / "controls.json")],
    [str(weighted), "--weight", "weight", "--control", "promo", "-o", str(out / "wcontrols.json")],
    [str(sample / "wholesale.csv"), "--folds", "loo", "--semilog", "-o", str(out / "loo.json")],
]
for args in runs:
    assert main(["fit", *args, *common]) == 0, args

import fitcore
from fitcore.review import evidence, influence
data = fitcore.load(str(sample / "wholesale.csv"), fitcore.Columns(segments=("region",), date="week"))
results = fitcore.fit_batch(data)
s = int(np.flatnonzero(results.chosen >= 0)[0])
c = int(results.chosen[s])
prices = np.linspace(results.mid[s] - results.half[s], results.mid[s] + results.half[s], 40)
evidence.curve(results, s, c, prices)
evidence.band(results, s, c, prices)
influence.series_influence(results, s)

from numba.core.dispatcher import Dispatcher
found = {}
for name, module in list(sys.modules.items()):
    if name.startswith("fitcore."):
        for attribute, value in vars(module).items():
            if isinstance(value, Dispatcher) and value.py_func.__module__ == name:
                found[name + "." + attribute] = [str(sig) for sig in value.signatures]
print(json.dumps(found))
"""


def test_every_compiled_loop_has_one_version_across_fits_and_evidence(tmp_path):
    done = subprocess.run([sys.executable, "-c", RUN, str(SAMPLE), str(tmp_path)], capture_output=True, text=True)
    assert done.returncode == 0, done.stderr[-3000:]
    found = json.loads(done.stdout.strip().splitlines()[-1])
    # The run reached the loops it is meant to exercise: fits without and with controls, the log
    # families' smearing, the flags' grid scan, the intervals' power sums, one series' leverages.
    for loop in ("fitcore.fit.kernels.family_fit", "fitcore.fit.controlled.controlled_fit",
                 "fitcore.fit.families.logvolume.volume_errors", "fitcore.fit.basis._evaluate_rows",
                 "fitcore.review.intervals._power_sums", "fitcore.fit.basis._leverage_segments"):
        assert found.get(loop), f"{loop} was never called"
    several = {loop: sigs for loop, sigs in found.items() if len(sigs) > 1}
    assert not several, "loops compiled more than once:\n" + "\n".join(
        f"{loop}: {len(sigs)}\n    " + "\n    ".join(sigs) for loop, sigs in several.items())
