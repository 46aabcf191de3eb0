"""Do two installations write the same results?  For a change that must not move the results format.

    python tests/bench/same_results.py /path/to/other/bin/pricefold [--data FILE.csv ...]

Runs ``pricefold fit`` with this checkout's interpreter and with the other installation on the
sample (plain; segments, dates and a plan; with controls and a season; a week later against a ledger
of accepted proposals) and on each ``--data`` file, to JSON and Parquet, then compares: JSON byte for
byte, Parquet read back as Arrow tables (schema and its metadata equal, every column equal, NaN equal
to NaN where a float column holds it).  Prints one line a file and exits 1 if any differs.
"""
from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

ROOT = Path(__file__).resolve().parents[2]
SAMPLE = ROOT / "sample"


def same_column(a: pa.ChunkedArray, b: pa.ChunkedArray) -> bool:
    if a.equals(b):
        return True
    x, y = a.combine_chunks(), b.combine_chunks()  # Arrow's equals takes NaN for unequal to itself
    if pa.types.is_dictionary(x.type) and x.type == y.type:  # each row group its own dictionary: the texts
        x, y = x.dictionary_decode(), y.dictionary_decode()
        return x.equals(y)
    if x.type != y.type or x.is_null().to_pylist() != y.is_null().to_pylist():
        return False
    if pa.types.is_list(x.type) and x.offsets.to_pylist() != y.offsets.to_pylist():
        return False
    while pa.types.is_list(x.type) or pa.types.is_fixed_size_list(x.type):
        x, y = x.flatten(), y.flatten()
    x, y = x.to_numpy(zero_copy_only=False), y.to_numpy(zero_copy_only=False)
    return np.array_equal(x, y, equal_nan=x.dtype.kind == "f")


def same_file(a: Path, b: Path, new: tuple[str, ...] = ()) -> bool:
    """The same bytes (JSON) or the same columns and schema (Parquet); ``new``: backtest fields only ``a`` (this
    installation) writes, left out of it first (``backtest_NAME`` columns, a JSON backtest's ``NAME``)."""
    if a.suffix == ".json":
        if not new:
            return a.read_bytes() == b.read_bytes()
        ours = json.loads(a.read_text())
        for series in ours["series"]:
            for name in new:
                (series.get("backtest") or {}).pop(name, None)
        return ours == json.loads(b.read_text())
    x, y = pq.read_table(a), pq.read_table(b)
    x = x.drop_columns([f"backtest_{name}" for name in new if f"backtest_{name}" in x.column_names])
    return x.schema.equals(y.schema, check_metadata=True) and all(
        same_column(x.column(name), y.column(name)) for name in x.column_names)


def runs(work: Path, extra: list[Path]) -> dict[str, list[str]]:
    plan = ["--segment", "region", "--date", "week", "--plan", str(SAMPLE / "plan.csv")]
    later = work / "later.csv"
    subprocess.run([sys.executable, str(SAMPLE / "next_week.py"), str(later), "--weeks", "3",
                    "--from", str(SAMPLE / "wholesale.csv")], check=True, capture_output=True)
    cases = {"plain": [str(SAMPLE / "wholesale.csv")], "plan": [str(SAMPLE / "wholesale.csv"), *plan],
             "controls": [str(SAMPLE / "wholesale.csv"), *plan, "--control", "promo", "--season", "1"],
             "ledger": [str(later), *plan, "--ledger", str(work / "ledger.jsonl")]}
    cases.update({f"data{i}": [str(path)] for i, path in enumerate(extra)})
    return cases


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("other", help="the other installation's pricefold command")
    parser.add_argument("--data", type=Path, action="append", default=[], help="a further CSV or Parquet file")
    parser.add_argument("--new-backtest-field", action="append", default=[], metavar="NAME",
                        help="a backtest field this installation writes and the other does not (left out)")
    args = parser.parse_args()
    ours = [sys.executable, "-m", "pricefold"]
    with tempfile.TemporaryDirectory() as name:
        work = Path(name)
        subprocess.run([*ours, "fit", str(SAMPLE / "wholesale.csv"), *runs(work, [])["plan"][1:], "-o",
                        str(work / "signed.json"), "-q"], check=True)
        subprocess.run([*ours, "ledger", "accept-unflagged", str(work / "signed.json"), "--ledger",
                        str(work / "ledger.jsonl"), "--analyst", "bench", "-q"], check=True)
        differ = 0
        for case, fit_args in runs(work, args.data).items():
            for ending in (("json", "parquet") if not case.startswith("data") else ("parquet",)):
                written = []
                for who, command in (("ours", ours), ("other", [args.other])):
                    out = work / f"{case}.{who}.{ending}"
                    subprocess.run([*command, "fit", *fit_args, "-o", str(out), "-q"], check=True)
                    written.append(out)
                same = same_file(*written, tuple(args.new_backtest_field))
                differ += not same
                print(f"{'same' if same else 'DIFFERENT'}  {case}.{ending}")
    sys.exit(1 if differ else 0)


if __name__ == "__main__":
    main()
