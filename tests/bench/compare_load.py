"""Does this installation load files exactly as another one does?  (A check for changes to the loader.)

    python tests/bench/compare_load.py --before /work/main/.venv/bin/python [EXTRA_DATA_FILE ...]

Writes a corpus to a temporary folder — every data file of the hostile-input corpus, and invented files
of 300,000 rows with rejects in them, interleaved series, blank and spaced keys, quoted line breaks,
CRLF, a byte-order mark, gzip, Parquet with row groups, dictionary and integer keys — then loads each
file under several column settings, here and with the other installation's Python (each in its own
process), and compares everything loaded: the ``Dataset`` (key names and strings, offsets, every row
array byte for byte, source, controls, fingerprints, key hashes), the rejected rows' lines and reasons,
the rejects file byte for byte, or the error's message.  Prints each difference and a tally; exit 1
when anything differs.  Not a test: it needs a second installation.
"""
from __future__ import annotations

import argparse
import gzip
import io
import pickle
import subprocess
import sys
import tempfile
from pathlib import Path

COLUMN_SETTINGS = [{}, {"date": "week"}, {"weight": "w"}, {"date": "week", "weight": "w"},
                   {"date": "week", "weight": "w", "controls": ["promo"], "segments": ["region"]},
                   {"segments": ["region"], "volume": "promo"}]


def snapshot(path: str, settings: dict) -> dict:
    """Everything a load of ``path`` gives, as plain values (or the error it raised)."""
    import numpy as np

    from fitcore.data.columns import Columns
    from fitcore.data.loader import load_with_rejects
    from fitcore.data.rejects import write_rejects
    columns = Columns(**{k: tuple(v) if isinstance(v, list) else v for k, v in settings.items()})
    try:
        data, rejects = load_with_rejects(path, columns)
    except Exception as exc:  # noqa: BLE001 - the message is what is compared
        return {"error": f"{type(exc).__name__}: {exc}"}
    out = io.BytesIO()
    if len(rejects):
        write_rejects(rejects, out)

    def raw(array):
        return None if array is None else (str(array.dtype), array.shape, np.ascontiguousarray(array).tobytes())
    return {"key_names": data.key_names, "keys": {k: [str(v) for v in data.keys[k]] for k in data.key_names},
            "key_types": {k: str(np.asarray(data.keys[k]).dtype) for k in data.key_names},
            **{name: raw(getattr(data, name)) for name in ("offsets", "price", "volume", "weight", "date", "line")},
            "controls": {k: raw(v) for k, v in data.controls.items()}, "control_binary": data.control_binary,
            "source": data.source, "fingerprints": data.fingerprints, "key_hash": raw(data.key_hash),
            "rejects": (rejects.kind, rejects.delimiter, rejects.lines.tolist(), [str(r) for r in rejects.reasons]),
            "rejects_file": out.getvalue()}


def dump(manifest: Path, out: Path) -> None:
    cases = [line.split("\t") for line in manifest.read_text().splitlines()]
    found = {f"{path} {settings}": snapshot(path, eval(settings)) for path, settings in cases}  # noqa: S307
    out.write_bytes(pickle.dumps(found))


def invented(folder: Path, n: int = 300_000) -> list[Path]:
    """Files with something wrong in a few rows, in several shapes (see the module's docstring)."""
    import numpy as np
    import pyarrow as pa
    import pyarrow.parquet as pq
    rng = np.random.default_rng(7)
    series = rng.integers(0, 20_000, n)
    product = np.char.add("item-", (series // 4).astype(str)).astype(object)
    region = np.array(["north", "south", "east", "west"], dtype=object)[series % 4]
    price = np.round(rng.uniform(1, 9, n), 2).astype(object).astype(str)
    volume = np.round(rng.uniform(0, 500, n), 1).astype(object).astype(str)
    week = (np.datetime64("2024-01-01") + rng.integers(0, 400, n)).astype(str).astype(object)
    weight = np.round(rng.uniform(0.5, 2, n), 3).astype(object).astype(str)
    promo = rng.integers(0, 2, n).astype(object).astype(str)
    trouble = rng.choice(n, 2_000, replace=False)
    for i, at in enumerate(trouble):
        column, value = [(price, "x1"), (price, "-3"), (volume, ""), (volume, "nan"), (volume, "inf"),
                         (product, ""), (product, "   "), (week, "2024-13-01"), (weight, "-1"), (promo, "1e400"),
                         (price, "1e16"), (week, ""), (product, " item-3"), (weight, "")][i % 14]
        column[at] = value
    cells = np.stack([product, region, price, volume, week, weight, promo], axis=1)
    header = "product,region,price,volume,week,w,promo"
    text = lambda rows: header + "\n" + "\n".join(",".join(row) for row in rows) + "\n"  # noqa: E731
    plain = text(cells)
    quoted = plain.replace("item-17,", '"item\n17",').replace("item-5,", '"item-5",')
    files = {"invented.csv": plain.encode(), "invented_crlf.csv": plain.replace("\n", "\r\n").encode(),
             "invented_bom.csv": b"\xef\xbb\xbf" + plain.encode(), "invented_quoted.csv": quoted.encode(),
             "invented_blank.csv": plain.replace("\nitem-9,", "\n\nitem-9,").encode(),
             "invented_semicolon.csv": plain.replace(",", ";").encode(),
             "invented_grouped.csv": text(cells[np.argsort(product, kind="stable")]).encode()}
    paths = []
    for name, data in files.items():
        (folder / name).write_bytes(data)
        paths.append(folder / name)
    (folder / "invented.csv.gz").write_bytes(gzip.compress(files["invented.csv"], mtime=0))
    paths.append(folder / "invented.csv.gz")
    numbers = lambda text: pa.array([float(v) if _is_float(v) else None for v in text], pa.float64())  # noqa: E731
    table = pa.table({"product": pa.array([v or None for v in product], pa.string()), "region": region.tolist(),
                      "price": numbers(price), "volume": numbers(volume),
                      "week": pa.array([v or None for v in week], pa.string()), "w": numbers(weight),
                      "promo": numbers(promo)})
    keys = table.column("product")
    variants = {"invented.parquet": table,
                "invented_dict.parquet": table.set_column(0, "product", keys.dictionary_encode()),
                "invented_large.parquet": table.set_column(0, "product", keys.cast(pa.large_string())),
                "invented_int.parquet": table.set_column(0, "product", pa.array(series // 4)),
                "invented_text_price.parquet": table.set_column(2, "price", pa.array(price.tolist())),
                "invented_odd_dict.parquet": table.set_column(0, "product", _odd_dictionary(pa, series // 4))}
    for name, variant in variants.items():
        pq.write_table(variant, folder / name, row_group_size=70_000)
        paths.append(folder / name)
    return paths


def _odd_dictionary(pa, codes):
    """Dictionary-encoded keys whose dictionary repeats values (Arrow allows it)."""
    dictionary = pa.array([f"item-{i % 4_000}" for i in range(int(codes.max()) + 51)])
    return pa.DictionaryArray.from_arrays(pa.array(codes, pa.int32()), dictionary)


def _is_float(text: str) -> bool:
    try:
        float(text)
        return True
    except ValueError:
        return False


def hostile(folder: Path) -> list[Path]:
    sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
    import pyarrow as pa
    import pyarrow.parquet as pq

    from tests.hostile.files import PARQUET, TEXT
    paths = []
    for name, data in TEXT.items():
        if name.startswith(("toml", "plan", "ledger", "results", "notes")):
            continue
        path = folder / f"hostile_{name}.{'tsv' if name == 'tab' else 'csv'}"
        path.write_bytes(data)
        paths.append(path)
    for name, make in PARQUET.items():
        path = folder / f"hostile_{name}.parquet"
        pq.write_table(make(pa), path)
        paths.append(path)
    return paths


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--before", help="the other installation's Python")
    parser.add_argument("--dump", nargs=2, metavar=("MANIFEST", "OUT"), help=argparse.SUPPRESS)
    parser.add_argument("extra", nargs="*", help="more data files (default settings only)")
    args = parser.parse_args()
    if args.dump:
        return dump(Path(args.dump[0]), Path(args.dump[1]))
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        cases = [(str(p), str(s)) for p in hostile(folder) + invented(folder) for s in COLUMN_SETTINGS]
        cases += [(str(Path(p).resolve()), "{}") for p in args.extra]
        manifest = folder / "manifest.tsv"
        manifest.write_text("\n".join("\t".join(case) for case in cases))
        found = {}
        for who, python in (("before", args.before), ("now", sys.executable)):
            subprocess.run([python, __file__, "--dump", str(manifest), str(folder / who)], check=True)
            found[who] = pickle.loads((folder / who).read_bytes())
    differ = 0
    for case, before in found["before"].items():
        now = found["now"][case]
        if before != now:
            differ += 1
            parts = [k for k in before.keys() | now.keys() if before.get(k) != now.get(k)]
            print(f"DIFFERENT {case}: {', '.join(sorted(parts))}")
            if "error" in parts:
                print(f"   before: {before.get('error')}\n   now:    {now.get('error')}")
    errors = sum("error" in value for value in found["now"].values())
    print(f"{len(found['before'])} loads compared ({errors} ending in an error), {differ} different")
    sys.exit(1 if differ else 0)


if __name__ == "__main__":
    main()
