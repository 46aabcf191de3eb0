"""A fixed set of fits whose every number is recorded, so that restructuring never moves one.

The recorded outputs (``fixed_fits.json.gz``) are pricefold's own results as
of the commit that added this file, through the public route only: load or
build a dataset, ``fit_batch``, ``diagnose``, write the JSON and Parquet
results files, read the files back.  They are not outside reference values
(those live beside each reference test); they pin behaviour.

Re-record only when a change of numbers is intended, and say so in the
commit: ``python -m tests.reference.fixed_fits --record [NAME ...]``.  The random
fits were re-recorded once on their frozen input (``fixed_random.npz``), after
the code of two earlier commits gave byte-identical outputs on it.

The fits: a frozen copy of the bundled invented sample (k-fold shuffled, leave-one-out with
the ``lowest`` rule, time-ordered, file order with fewer degrees and no
log-log), random weighted series with dates, frozen as exact bytes (shuffled with a plan
price per series, leave-one-out, time-ordered), and NIST StRD Wampler1/Wampler2 as two
series (data in ``nist_strd.py``).
"""
from __future__ import annotations

import gzip
import json
import math
import sys
import tempfile
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
RECORDED = HERE / "fixed_fits.json.gz"
# The bundled sample as it stood when the fits were recorded (the demo's sample may change since).
SAMPLE_DATA, SAMPLE_PLAN = HERE / "fixed_sample.csv.gz", HERE / "fixed_plan.csv"
# The random series as exact float64 bytes: made on one machine, the same everywhere.  Generated afresh,
# numpy's vectorised exp and log differ by an ulp between CPUs (AVX-512 or not), which moved every
# fingerprint and, through a degree-5 fit's cancellation, a few fold errors by 2e-11.
RANDOM_DATA = HERE / "fixed_random.npz"

# name → (data, settings keywords, plan)
FITS = {
    "sample-shuffled": ("sample", {}, "plan"),
    "sample-loo-lowest": ("sample", {"folds": "loo", "rule": "lowest"}, "plan"),  # first KEEP_SERIES kept
    "sample-time": ("sample", {"folds": 4, "fold_order": "time"}, "plan"),
    "sample-given": ("sample", {"folds": 3, "fold_order": "given", "degrees": (1, 2, 3), "loglog": False}, 2.5),
    "random-shuffled": ("random", {}, "per-series"),
    "random-loo": ("random", {"folds": "loo"}, "per-series"),
    "random-time": ("random", {"folds": 3, "fold_order": "time", "rule": "lowest"}, None),
    "nist": ("nist", {"folds": 3}, 10.0),
}


KEEP_SERIES = {"sample-loo-lowest": 40}  # a fold error per observation: the first series suffice
DIGITS = 13  # numbers are kept to this many significant digits (the comparison allows 1e-11)


def dataset(name: str):
    import fitcore
    from fitcore.data.loader import Columns, load
    if name == "sample":
        return load(SAMPLE_DATA, Columns(segments=("region",), date="week"))
    if name == "random":
        with np.load(RANDOM_DATA) as frozen:
            return fitcore.from_columns({"product": frozen["product"].astype(object)}, frozen["price"],
                                        frozen["volume"], weight=frozen["weight"], date=frozen["date"])
    from tests.reference.nist_strd import WAMPLER1_Y, WAMPLER2_Y, X
    keys = {"product": np.array(["wampler1"] * len(X) + ["wampler2"] * len(X), dtype=object)}
    return fitcore.from_columns(keys, np.array(X * 2, dtype=float), np.array(WAMPLER1_Y + WAMPLER2_Y, dtype=float))


def plan_for(data, plan):
    if plan == "plan":
        from fitcore.data.plan import plan_prices
        return plan_prices(data, SAMPLE_PLAN)
    if plan == "per-series":
        return np.where(np.arange(data.n_series) % 4 == 3, np.nan,
                        np.asarray(data.price)[data.offsets[:-1]] * 1.05)
    return plan


def outputs(name: str) -> dict:
    """The JSON results document and the Parquet table's rows of one fixed fit (no file paths)."""
    import pyarrow.parquet as pq

    import fitcore
    from fitcore.results.write import write_results
    from fitcore.review.flags import diagnose
    which, keywords, plan = FITS[name]
    data = dataset(which)
    results = fitcore.fit_batch(data, fitcore.FitSettings(**keywords), plan_price=plan_for(data, plan))
    diagnosis = diagnose(results)
    with tempfile.TemporaryDirectory() as folder:
        document = json.loads(write_results(results, Path(folder) / "r.json", diagnosis).read_text())
        rows = pq.read_table(write_results(results, Path(folder) / "r.parquet", diagnosis)).to_pylist()
    document.pop("input", None)
    wanted = ("plan_lo", "plan_hi", "plan_elasticity", "smearing", "window_coef")  # the rest is in the JSON too
    keep = KEEP_SERIES.get(name, len(document["series"]))
    return _rounded({"json": document["series"][:keep],
                     "parquet": [{k: row[k] for k in wanted} for row in rows[:keep * len(results.candidates)]]})


def _rounded(value):
    if isinstance(value, dict):
        return {k: _rounded(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_rounded(v) for v in value]
    if isinstance(value, float) and math.isfinite(value):
        return float(f"{value:.{DIGITS}g}")
    return value


def freeze_random() -> None:
    """Write the random series' arrays (``tests.conftest.random_dataset``, seed 11) as they come out here."""
    from tests.conftest import random_dataset
    data = random_dataset(11, n_series=120, with_weight=True, with_date=True)
    product = np.repeat(np.asarray(data.keys["product"], dtype=str), data.counts)
    np.savez_compressed(RANDOM_DATA, product=product, price=data.price, volume=data.volume, weight=data.weight,
                        date=data.date)


def record(names=None) -> None:
    """Record the outputs of ``names`` (default: every fit), keeping the others as recorded."""
    every = recorded() if names else {}
    every.update({name: outputs(name) for name in (names or FITS)})
    with gzip.open(RECORDED, "wt", encoding="utf-8") as handle:
        json.dump(every, handle, separators=(",", ":"))


def recorded() -> dict:
    with gzip.open(RECORDED, "rt", encoding="utf-8") as handle:
        return json.load(handle)


def differences(old, new, where: str = "", rtol: float = 1e-11) -> list[str]:
    """Every place two outputs disagree (fields added to ``new`` are allowed): numbers beyond ``rtol`` (relative, or absolute near zero), anything else exactly."""
    if isinstance(old, dict) and isinstance(new, dict):  # fields may be added, none lost
        if old.keys() - new.keys():
            return [f"{where}: lost {sorted(old.keys() - new.keys())}"]
        return [d for k in old for d in differences(old[k], new[k], f"{where}.{k}", rtol)]
    if isinstance(old, list) and isinstance(new, list):
        if len(old) != len(new):
            return [f"{where}: length {len(old)} became {len(new)}"]
        return [d for i, (a, b) in enumerate(zip(old, new)) for d in differences(a, b, f"{where}[{i}]", rtol)]
    numeric = (int, float)
    if isinstance(old, numeric) and isinstance(new, numeric) and not isinstance(old, bool) \
            and not isinstance(new, bool):
        if math.isnan(old) and math.isnan(new):
            return []
        if old == new or abs(old - new) <= rtol * max(abs(old), abs(new), 1e-3):
            return []
        return [f"{where}: {old!r} became {new!r}"]
    return [] if old == new else [f"{where}: {old!r} became {new!r}"]


if __name__ == "__main__":
    if sys.argv[1:2] == ["--record"]:
        record(sys.argv[2:] or None)
        print(f"recorded {', '.join(sys.argv[2:]) or 'every fit'} → {RECORDED}")
    else:
        print("usage: python -m tests.reference.fixed_fits --record [NAME ...]   (only when numbers are meant to "
              "change)")
