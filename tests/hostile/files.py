"""Inputs of the hostile-input corpus, made on demand in each case's folder.

A case names each file it needs and how to make it (``make(folder, name, how)``): ``how`` is a key of
``TEXT`` (bytes written as they are), or one of the kinds below.  Everything here is invented.

    link:TARGET       a symbolic link to TARGET          hardlink:TARGET   a second name for TARGET
    dir               an empty folder                    fifo              a named pipe (readers must not hang)
    parquet:NAME      a Parquet file from PARQUET[NAME]  parts             a Parquet folder of two files
    fit:ARGS          ``pricefold fit ARGS -o NAME --quiet`` run in the folder (a results file or folder)
    damaged:HOW       results of ``fit d.csv`` as JSON, then ``DAMAGE[HOW]`` applied to the document
    pdamaged:HOW      results of ``fit d.csv`` as Parquet, then ``PDAMAGE[HOW]`` applied to the table
    ledger:RESULTS    a ledger holding ``accept-unflagged RESULTS``
    deepledger:RESULTS  the same with a line of arrays nested 1,100 deep after its first (a RecursionError in
                      the standard library's parser, where orjson gives up at 1,024)
    gz:KEY            TEXT[KEY] gzipped                  cut:KEY           TEXT[KEY] gzipped, then cut short
"""
from __future__ import annotations

import gzip
import json
import os
import random
from pathlib import Path


def _rows(n_products: int = 2, n: int = 16, sep: str = ",", eol: str = "\n", date: bool = True) -> str:
    head = sep.join(["product", "price", "volume", "week"] if date else ["product", "price", "volume"])
    lines = [head]
    for p in range(n_products):
        for i in range(n):
            price = 1.0 + 0.07 * i + 0.5 * p
            volume = round(400 - 90 * price + (i * 7919 % 13), 1)
            cells = [f"item {p}", f"{price:.2f}", f"{volume}"] + ([f"2025-{1 + i // 4:02d}-{1 + 7 * (i % 4):02d}"] if date else [])
            lines.append(sep.join(cells))
    return eol.join(lines) + eol


GOOD = _rows()
BAD_ROW = "item 0,2.50,lots,2025-06-01\n"


def _with(text: str, line: int, row: str) -> str:
    """``text`` with ``row`` inserted as physical line ``line`` (1 = header)."""
    lines = text.splitlines(keepends=True)
    lines.insert(line - 1, row)
    return "".join(lines)


def _wide_cell(size: int) -> str:
    rows = GOOD.splitlines()
    out = [rows[0] + ",notes"] + [row + ",short" for row in rows[1:]]
    out[3] = out[3].rsplit(",", 1)[0] + "," + "x" * size
    return "\n".join(out) + "\n"


def _numbers(values: list[str], column: str = "price") -> str:
    rows = GOOD.splitlines()
    index = {"price": 1, "volume": 2}[column]
    out = [rows[0]]
    for i, row in enumerate(rows[1:]):
        cells = row.split(",")
        if i < len(values):
            cells[index] = values[i]
        out.append(",".join(cells))
    return "\n".join(out) + "\n"


def _weighted(weights) -> str:
    rows = GOOD.splitlines()
    out = [rows[0] + ",w"]
    for i, row in enumerate(rows[1:]):
        out.append(row + "," + (weights(i) if callable(weights) else weights))
    return "\n".join(out) + "\n"


def _dates(value: str, at: int = 4) -> str:
    rows = GOOD.splitlines()
    cells = rows[at].split(",")
    cells[3] = value
    rows[at] = ",".join(cells)
    return "\n".join(rows) + "\n"


def _mixed_offsets() -> str:
    rows = GOOD.splitlines()
    out = [rows[0]]
    for i, row in enumerate(rows[1:]):
        cells = row.split(",")
        cells[3] = cells[3] + ("T00:00:00+01:00" if i % 2 else "T00:00:00-05:00")
        out.append(",".join(cells))
    out[6] = out[6].rsplit(",", 1)[0] + ",2025-13-45T00:00:00+02:00"
    return "\n".join(out) + "\n"


TEXT: dict[str, bytes] = {
    "good": GOOD.encode(),
    "good_nodate": _rows(date=False).encode(),
    "rejects": (GOOD + BAD_ROW).encode(),
    "bom": b"\xef\xbb\xbf" + GOOD.encode(),
    "bom_rejects": b"\xef\xbb\xbf" + (GOOD + BAD_ROW).encode(),
    "bom_quoted": b"\xef\xbb\xbf" + GOOD.replace("product,price", '"product","price"', 1).encode(),
    "semicolon": _rows(sep=";").encode(),
    "tab": _rows(sep="\t").encode(),
    "pipe": _rows(sep="|").encode(),
    "decimal_comma": _rows(sep=";").replace(".", ",").encode(),
    "crlf": _rows(eol="\r\n").encode(),
    "crlf_bad": (_rows(eol="\r\n") + BAD_ROW.replace("\n", "\r\n")).encode(),
    "cr_only": _rows(eol="\r").encode(),
    "quoted_newline": _with(GOOD + "item 0,-1,5,2025-06-08\n", 3, '"app\nles",1.10,300,2025-01-01\n').encode(),
    "quoted_crlf": _with(_rows(eol="\r\n") + "item 0,-1,5,2025-06-08\r\n", 3,
                         '"app\r\nles",1.10,300,2025-01-01\r\n').encode(),
    "quoted_newline_header": ('"prod\nuct",price,volume,week\n' + GOOD.split("\n", 1)[1]).encode(),
    "newline_in_ignored": ("product,price,volume,week,notes\n" + "".join(
        line + (',"two\nlines"\n' if i == 3 else ",ok\n") for i, line in enumerate(GOOD.splitlines()[1:]))
        + "item 1,-2,5,2025-07-01,bad\n").encode(),
    "blank_lines": _with(_with(GOOD, 5, "\n"), 9, "\n").encode(),
    "trailing_blank": (GOOD + "\n\n\n").encode(),
    "no_final_newline": GOOD.rstrip("\n").encode(),
    "wide_ignored": _wide_cell(10 * 2 ** 20).encode(),
    "wide_key": _with(GOOD, 4, "k" * (2 * 2 ** 20) + ",1.5,100,2025-01-01\n").encode(),
    "long_header": ("item," + ",".join(f"measure {i} " + "m" * 60 for i in range(100)) + "\n"
                    + "a," + ",".join("1" * 100) + "\n").encode(),
    "dup_header": GOOD.replace("product,price,volume,week", "product,price,volume,price", 1).encode(),
    "dup_ignored": ("product,price,volume,week,x,x\n" + "".join(
        line + ",1,2\n" for line in GOOD.splitlines()[1:])).encode(),
    "empty_name_column": ("product,price,volume,week,\n" + "".join(
        line + ",\n" for line in GOOD.splitlines()[1:])).encode(),
    "header_only": b"product,price,volume,week\n",
    "empty": b"",
    "spaces_header": GOOD.replace("price", " price", 1).encode(),
    "case_header": GOOD.replace("price", "Price", 1).encode(),
    "binary": b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR" * 20,
    "latin1_key": GOOD.replace("item 0", "caf\xe9", 3).encode("latin-1"),
    "latin1_ignored": ("product,price,volume,week,notes\n" + "".join(
        line + ",caf\xe9\n" for line in GOOD.splitlines()[1:]) + "item 1,-2,5,2025-07-01,n\xe9\n").encode("latin-1"),
    "date_9999": _dates("9999-12-31").encode(),
    "date_1500": _dates("1500-01-01").encode(),
    "date_2262": _dates("2262-04-12").encode(),
    "date_1677": _dates("1677-09-21").encode(),
    "date_edge_ok": _dates("2262-04-11").encode(),
    "date_feb30": _dates("2025-02-30").encode(),
    "dates_day_first": "".join((line if i == 0 else ",".join(line.split(",")[:3] + [
        "/".join(reversed(line.split(",")[3].split("-")))])) + "\n" for i, line in enumerate(GOOD.splitlines())).encode(),
    "short_line": _with(GOOD, 5, "item 0,2.5,40\n").encode(),
    "thousands": _numbers([f'"5,{710 + i}"' for i in range(32)], "volume").encode(),
    "thousands_twice": _numbers([f'"1,005,{710 + i}"' for i in range(32)], "volume").encode(),
    "date_mixed_offsets": _mixed_offsets().encode(),
    "date_time": GOOD.replace("-01,", "-01T12:30:00,").encode(),
    "huge_price": _numbers(["1e308"] * 16).encode(),
    "huge_volume": _numbers(["1e308", "1.7e308", "1e307"] * 6, "volume").encode(),
    "tiny_price": _numbers(["1e-320", "2e-320", "3e-320", "4e-320", "5e-320"] * 4).encode(),
    "tiny_volume": _numbers(["1e-320"] * 16, "volume").encode(),
    "overflow_literal": _numbers(["1e400"]).encode(),
    "mixed_magnitude": _numbers(["1e308", "1e-308", "1", "2", "3"] * 4).encode(),
    "zero_volume": _numbers(["0"] * 16, "volume").encode(),
    "weights_zero": _weighted(lambda i: "0" if i < 16 else "1").encode(),
    "weights_huge": _weighted(lambda i: "1e308" if i < 16 else "1").encode(),
    "weights_tiny": _weighted(lambda i: "1e-320" if i < 16 else "1").encode(),
    "weights_inf": _weighted(lambda i: "inf" if i == 3 else "1").encode(),
    "weights_negative": _weighted(lambda i: "-1" if i == 3 else "1").encode(),
    "all_bad": b"product,price,volume,week\na,-1,2,2025-01-01\nb,x,3,2025-01-01\n",
    "duplicates": (GOOD + "item 0,1.05,299,2025-01-01\n").encode(),
    "control_chars": GOOD.replace("item 0", "item \x1b[2J0").encode(),
    "formula_key": (GOOD + "=cmd|' /C calc'!A0,-1,5,2025-06-01\n").encode(),
    "plan": b"product,plan_price\nitem 0,2.0\nitem 1,2.4\n",
    "plan_unknown": b"product,plan_price\nzzz,2.0\n",
    "plan_inf": b"product,plan_price\nitem 0,inf\n",
    "plan_nan": b"product,plan_price\nitem 0,nan\n",
    "plan_dup": b"product,plan_price\nitem 0,2.0\nitem 0,2.1\n",
    "plan_no_price": b"product,price\nitem 0,2.0\n",
    "plan_bom": b"\xef\xbb\xbfproduct,plan_price\nitem 0,2.0\n",
    "plan_semicolon": b"product;plan_price\nitem 0;2.0\n",
    "plan_thousands": b'product,plan_price\nitem 0,"1,250"\n',
    "plan_empty": b"",
    "plan_header_only": b"product,plan_price\n",
    "plan_blank_cells": b"product,plan_price\nitem 0,2.0\n,\n",
    "toml_seed": b"[fit]\nseed = 1\n",
    "toml_segments_int": b"[columns]\nsegments = [1]\n",
    "toml_segments_text": b'[columns]\nsegments = "region"\n',
    "toml_sep_two": b'[columns]\nsep = ";;"\n',
    "toml_sep_empty": b'[columns]\nsep = ""\n',
    "toml_sep_tab_escape": b'[columns]\nsep = "\\\\t"\n',
    "toml_plan_inf": b"[fit]\nplan_price = inf\n",
    "toml_plan_nan": b"[fit]\nplan_price = nan\n",
    "toml_plan_zero": b"[fit]\nplan_price = 0\n",
    "toml_plan_both": b'[fit]\nplan_price = 2.0\nplan = "plan.csv"\n',
    "toml_plan_number": b"[fit]\nplan = 3\n",
    "toml_folds_one": b"[fit]\nfolds = 1\n",
    "toml_folds_text": b'[fit]\nfolds = "many"\n',
    "toml_folds_bool": b"[fit]\nfolds = true\n",
    "toml_degrees_nine": b'[fit]\ndegrees = "9"\n',
    "toml_degrees_empty": b"[fit]\ndegrees = []\n",
    "toml_degrees_words": b'[fit]\ndegrees = ["a"]\n',
    "toml_degrees_float": b"[fit]\ndegrees = [1.5]\n",
    "toml_seed_negative": b"[fit]\nseed = -1\n",
    "toml_rule": b'[fit]\nrule = "best"\n',
    "toml_time_no_date": b'[fit]\nfold_order = "time"\n',
    "toml_loo_time": b'[fit]\nfolds = "loo"\nfold_order = "time"\n[columns]\ndate = "week"\n',
    "toml_price_empty": b'[columns]\nprice = ""\n',
    "toml_threshold_unknown": b"[thresholds]\nmin_pointz = 3\n",
    "toml_threshold_negative": b"[thresholds]\nmin_points = -1\n",
    "toml_threshold_inf": b"[thresholds]\nweak_score = inf\n",
    "toml_threshold_cook_inf": b"[thresholds]\ncook_floor = inf\n",
    "toml_plan_price_huge": b"[fit]\nplan_price = 1e300\n",
    "toml_bad": b"[fit\n",
    "toml_latin1": "[fit]\nrule = 'caf\xe9'\n".encode("latin-1"),
    "toml_table_value": b"fit = 3\n",
    "toml_unknown_table": b"[colums]\nprice = 'p'\n",
    "toml_good_as_json_name": b"[fit]\nseed = 1\n",
    "notes_json": b'{"mine": 1}\n',
    "deep_json": b"[" * 1100 + b"]" * 1100 + b"\n",
    "notes_csv": b"who,what\nme,my notes\n",
    "ledger_text": b'{"schema":"pricefold-ledger/1","seq":1}\n',
    "results_text_list": b"[]",
    "results_truncated": b'{"schema":"pricefold-results/1","settings":{',
    "garbage": bytes(range(256)) * 4,
    "old_rejects": b"product,price,volume,week,line,reason\nitem 0,2.50,lots,2025-06-01,34,non-numeric volume\n",
}

PARQUET = {
    "good": lambda pa: _good_table(pa),
    "rejects": lambda pa: pa.table({"product": ["a"] * 14 + ["b"], "price": [1.0 + i / 10 for i in range(14)] + [-1.0],
                                   "volume": [30.0 - i for i in range(15)]}),
    "price_text": lambda pa: pa.table({"product": ["a"] * 14, "price": [f"{1 + i / 10}" for i in range(13)] + ["x"],
                                      "volume": [30.0 - i for i in range(14)]}),
    "null_price": lambda pa: pa.table({"product": ["a"] * 3, "price": pa.array([None] * 3, pa.float64()),
                                      "volume": [1.0, 2.0, 3.0]}),
    "dup_columns": lambda pa: pa.Table.from_arrays([pa.array(["a"] * 3), pa.array([1.0, 2.0, 3.0]),
                                                     pa.array([3.0, 2.0, 1.0]), pa.array([9.0, 9.0, 9.0])],
                                                    names=["product", "price", "volume", "price"]),
    "date_9999": lambda pa: _good_table(pa, date_at=(3, "9999-12-31")),
    "no_rows": lambda pa: pa.table({"product": pa.array([], pa.string()), "price": pa.array([], pa.float64()),
                                   "volume": pa.array([], pa.float64())}),
    # true/false where numbers belong (pandas read every true as 1.0); "flag" for --weight / --control
    "bool_price": lambda pa: _good_table(pa).set_column(1, "price", pa.array([i % 3 > 0 for i in range(32)])),
    "bool_volume": lambda pa: _good_table(pa).set_column(2, "volume", pa.array([i % 3 > 0 for i in range(32)])),
    "bool_flag": lambda pa: _good_table(pa).append_column("flag", pa.array([i % 3 > 0 for i in range(32)])),
    "bool_dictionary_flag": lambda pa: _good_table(pa).append_column(
        "flag", pa.array([i % 3 > 0 for i in range(32)]).dictionary_encode()),
    "bool_plan": lambda pa: pa.table({"product": ["item 0", "item 1"], "plan_price": [True, True]}),
}


def _good_table(pa, date_at=None):
    import datetime
    rows = [line.split(",") for line in GOOD.splitlines()[1:]]
    dates = [datetime.date.fromisoformat(r[3]) for r in rows]
    if date_at:
        dates[date_at[0]] = datetime.date.fromisoformat(date_at[1])
    return pa.table({"product": [r[0] for r in rows], "price": [float(r[1]) for r in rows],
                     "volume": [float(r[2]) for r in rows], "week": pa.array(dates, pa.date32())})


def _drop(document, *path):
    target = document
    for step in path[:-1]:
        target = target[step]
    del target[path[-1]]
    return document


def _set(document, value, *path):
    target = document
    for step in path[:-1]:
        target = target[step]
    target[path[-1]] = value
    return document


DAMAGE = {
    "series_not_list": lambda d: _set(d, {"a": 1}, "series"),
    "series_missing": lambda d: _drop(d, "series"),
    "no_flags": lambda d: _drop(d, "series", 0, "flags"),
    "no_chosen": lambda d: _drop(d, "series", 0, "chosen"),
    "key_string": lambda d: _set(d, "item 0", "series", 0, "key"),
    "flag_no_severity": lambda d: _set(d, [{"code": "few-points", "message": "m"}], "series", 0, "flags"),
    "flags_not_list": lambda d: _set(d, "few-points", "series", 0, "flags"),
    "candidates_not_list": lambda d: _set(d, None, "series", 0, "candidates"),
    "candidate_no_name": lambda d: _drop(d, "series", 0, "candidates", 0, "name"),
    "score_text": lambda d: _set(d, "high", "series", 0, "score"),
    "n_text": lambda d: _set(d, "many", "series", 0, "n"),
    "chosen_unknown": lambda d: _set(d, "poly9", "series", 0, "chosen"),
    "no_settings": lambda d: _drop(d, "settings"),
    "no_input": lambda d: _drop(d, "input"),
    "schema_other": lambda d: _set(d, "pricefold-results/99", "schema"),
    "series_item_text": lambda d: _set(d, "oops", "series", 0),
    "no_fingerprint": lambda d: _drop(d, "series", 0, "fingerprint"),
    "plan_text": lambda d: _set(d, "soon", "series", 0, "plan"),
    "price_range_short": lambda d: _set(d, [1.0], "series", 0, "price_range"),
    "key_value_number": lambda d: _set(d, {"product": 7}, "series", 0, "key"),
    "coef_text": lambda d: _set(d, "x", "series", 0, "candidates", 1, "coef"),
    "threshold_inf": lambda d: _set(d, float("inf"), "settings", "thresholds", "cook_floor"),  # an earlier fit's
    "seed_beyond_64_bits": lambda d: _set(d, 2 ** 64, "settings", "seed"),  # fitted as seed 0
    "key_column_missing": lambda d: _set(d, {"region": "North"}, "series", 0, "key"),  # keyed by product
    "key_column_extra": lambda d: _set(d, "North", "series", 1, "key", "region"),
}


def _header_set(pa, t, value, *path):
    """``t`` with its pricefold header changed (and the header's checksum made to match, as a writer would)."""
    import hashlib
    header = json.dumps(_set(json.loads(t.schema.metadata[b"pricefold"]), value, *path)).encode()
    return t.replace_schema_metadata({**t.schema.metadata, b"pricefold": header,
                                      b"pricefold_sha256": hashlib.sha256(header).hexdigest().encode()})


PDAMAGE = {
    "no_flags": lambda pa, t: t.drop_columns(["flags"]),
    "no_key_columns": lambda pa, t: t.replace_schema_metadata({b"pricefold": json.dumps(
        {k: v for k, v in json.loads(t.schema.metadata[b"pricefold"]).items() if k != "key_columns"}).encode()}),
    "key_column_missing": lambda pa, t: t.drop_columns(["product"]),
    "no_metadata": lambda pa, t: t.replace_schema_metadata(None),
    "metadata_not_json": lambda pa, t: t.replace_schema_metadata({b"pricefold": b"{oops"}),
    "flags_not_json": lambda pa, t: t.set_column(t.schema.get_field_index("flags"), "flags",
                                                 pa.array(["not json"] * t.num_rows)),
    "no_candidate": lambda pa, t: t.drop_columns(["candidate"]),
    **{f"no_{name}": (lambda name: lambda pa, t: t.drop_columns([name]))(name)
       for name in ("window_coef", "sigma2", "df", "cov_unscaled", "last_date")},
    "threshold_inf": lambda pa, t: _header_set(pa, t, float("inf"), "settings", "thresholds", "cook_floor"),
    "no_interval_parts": lambda pa, t: t.drop_columns(["window_coef", "sigma2", "df", "cov_unscaled", "last_date"]),
}


def make(folder: Path, name: str, how: str, run) -> None:
    """Create ``folder/name`` as ``how`` says; ``run(argv)`` runs pricefold in ``folder`` (for results)."""
    path = folder / name
    path.parent.mkdir(parents=True, exist_ok=True)
    kind, _, arg = how.partition(":")
    if how in TEXT:
        path.write_bytes(TEXT[how])
    elif kind == "gz":
        path.write_bytes(gzip.compress(TEXT[arg], mtime=0))
    elif kind == "cut":
        noisy = TEXT[arg] * 60 + "".join(f"item 9,{random.Random(i).random() + 1:.6f},{i},2026-01-01\n"
                                         for i in range(400)).encode()
        packed = gzip.compress(noisy, mtime=0)
        path.write_bytes(packed[: len(packed) * 2 // 3])
    elif kind == "cutsmall":
        packed = gzip.compress(TEXT[arg], mtime=0)
        path.write_bytes(packed[: len(packed) * 2 // 3])
    elif kind == "link":
        path.symlink_to(arg)
    elif kind == "hardlink":
        os.link(folder / arg, path)
    elif how == "dir":
        path.mkdir()
    elif how == "fifo":
        os.mkfifo(path)
    elif kind == "parquet":
        import pyarrow as pa
        import pyarrow.parquet as pq
        pq.write_table(PARQUET[arg](pa), path)
    elif how == "parts":
        import pyarrow as pa
        import pyarrow.parquet as pq
        table = PARQUET["good"](pa)
        path.mkdir()
        pq.write_table(table.slice(0, 10), path / "part-0.parquet")
        pq.write_table(table.slice(10), path / "part-1.parquet")
    elif kind == "fit":
        code = run(["fit", *arg.split(), "-o", name, "--quiet"])
        assert code == 0, f"could not make {name}: fit {arg} exited {code}"
    elif kind == "damaged":
        scratch = f".scratch-{name}.json"
        assert run(["fit", "d.csv", "-o", scratch, "--quiet"]) == 0
        document = json.loads((folder / scratch).read_text())
        (folder / scratch).unlink()
        path.write_text(json.dumps(DAMAGE[arg](document)))
    elif kind == "pdamaged":
        import pyarrow as pa
        import pyarrow.parquet as pq
        scratch = f".scratch-{name}.parquet"
        assert run(["fit", "d.csv", "-o", scratch, "--quiet"]) == 0
        table = pq.read_table(folder / scratch)
        (folder / scratch).unlink()
        pq.write_table(PDAMAGE[arg](pa, table), path)
    elif kind == "ledger":
        assert run(["ledger", "accept-unflagged", arg, "--ledger", name]) == 0
    elif kind == "deepledger":  # a ledger whose second line is arrays nested past the JSON parser's depth
        assert run(["ledger", "accept-unflagged", arg, "--ledger", name]) == 0
        first, rest = path.read_bytes().split(b"\n", 1)
        path.write_bytes(first + b"\n" + TEXT["deep_json"] + rest)
    else:
        raise ValueError(f"unknown file kind {how!r} for {name}")
