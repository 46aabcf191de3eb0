"""Reading results files back as plain records (the JSON layout), from JSON, Parquet or a results folder.

The one reader every command uses (``show``, ``ledger export`` and ``accept-unflagged``, the triage
screen's factory): it checks what it reads (``check_header``, ``check_series``, the Parquet columns) and
names what is missing or malformed in one line, so a damaged file is an error, never a traceback.
"""
from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path

import numpy as np

from ..data.columns import is_parquet_name
from ..data.textfile import regular_or_folder
from ..errors import DataError, first_line
from ..fit.results import SCHEMA
from .checks import (HEADER, PARQUET_COLUMNS, check_header, check_header_digest, check_key_columns, check_series,
                     check_unique_keys)
from .control_fields import record_fields

RUN_SUMMARY = "_summary.json"


def result_parts(path: str | Path) -> list[Path] | None:
    """The part files of a results folder (written by ``fit --engine dask``), or None if ``path`` is not one."""
    path = Path(path)
    if not path.is_dir() or not (path / RUN_SUMMARY).exists():
        return None
    parts = sorted(path.glob("part-*.parquet"))
    if not parts:
        raise DataError("this results folder holds no part files", path=str(path))
    return parts


def _check_file(path: Path) -> None:
    """One line for a results path that is missing, a folder that is not a results folder, or not a file."""
    if regular_or_folder(path, "a results file"):
        raise DataError(f"is a folder without {RUN_SUMMARY}; expected a results file or a results folder",
                        path=str(path))


def read_results(path: str | Path) -> tuple[dict, list[dict]]:
    """``(header, series)`` of a results file or folder; ``series`` as in the JSON layout."""
    path = Path(path)
    parts = result_parts(path)
    if parts is not None:
        read = [_read_parquet(part) for part in parts]
        records = [record for _, records in read for record in records]
        check_unique_keys(path, records)
        return read[0][0], records
    _check_file(path)
    if path.suffix.lower() == ".json":
        try:
            document = json.loads(path.read_text(encoding="utf-8-sig"))  # an editor's byte-order mark, as data files
        except (UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise DataError(f"expected a pricefold results file, could not read it as JSON ({exc})",
                            path=str(path)) from None
        except RecursionError:  # (a hostile file: arrays nested past the parser's depth)
            raise DataError("expected a pricefold results file, could not read it as JSON (nested too deeply)",
                            path=str(path)) from None
        check_schema(path, document)
        check_header(path, document, "series")
        series = document.pop("series")
        for i, record in enumerate(series):
            check_series(path, i, record)
        check_key_columns(path, document, series)
        check_unique_keys(path, series)
        return document, series
    if is_parquet_name(path):
        header, series = _read_parquet(path)
        check_unique_keys(path, series)
        return header, series
    raise DataError(f"expected a results file ending in .json or .parquet, got {path.name!r}", path=str(path))


def results_in_parts(path: str | Path, products: list[str] = (), keys: dict | None = None
                     ) -> tuple[dict, Iterator[list[dict]]]:
    """``(header, parts)``: the series one part at a time (a single file is one part), so a
    results folder of any size is read with the memory of one part.  ``products`` and ``keys``
    (column → value) keep only matching series; in Parquet they filter rows as they are read."""
    path = Path(path)
    parts = result_parts(path)
    if parts is None and not is_parquet_name(path):
        head, series = read_results(path)
        return head, iter([[r for r in series if _matches(r["key"], products, keys or {})]])
    meta = read_header(path)
    names = meta.pop("key_columns", [])
    wanted = ([(names[0], "in", list(products))] if products and names else []) + \
        [(name, "==", value) for name, value in (keys or {}).items() if name in names]
    if keys and any(name not in names for name in keys):
        return meta, iter([])  # a key column these results do not have matches nothing
    return meta, (_read_parquet(part, wanted or None)[1] for part in parts or [path])


def results_inputs(header: dict) -> list[tuple[str, str | None]]:
    """The files a results header names (the data, the plan, the settings file): a command reading these
    results must not write over them."""
    settings = header.get("settings") or {}
    plan = settings.get("plan") if isinstance(settings.get("plan"), dict) else {}
    return [("the data these results were fitted from", (header.get("input") or {}).get("path")),
            ("the plan file these results used", plan.get("file")),
            ("the settings file these results used", settings.get("config"))]


def _matches(key: dict, products, keys: dict) -> bool:
    """``keys``' values: a text, or a container of them (``fitcore.text.EitherForm``), as ``products``."""
    return (not products or next(iter(key.values()), None) in products) and \
        all(key.get(name) == value if isinstance(value, str) else key.get(name) in value
            for name, value in keys.items())


def read_header(path: str | Path) -> dict:
    """The header of a Parquet results file or folder, ``key_columns`` included (schema metadata only);
    checked to hold every column the readers use."""
    import pyarrow.parquet as pq
    path = (result_parts(path) or [Path(path)])[0]
    _check_file(path)
    try:
        schema = pq.read_schema(path)
    except Exception as exc:  # pyarrow raises several unrelated types for a bad file
        raise DataError(f"expected a pricefold results file ({first_line(exc)})", path=str(path)) from None
    check_header_digest(path, schema.metadata or {})
    try:
        meta = json.loads((schema.metadata or {}).get(HEADER, b"null"))
    except (UnicodeDecodeError, json.JSONDecodeError):
        raise DataError("expected a pricefold results file; its pricefold metadata is not JSON", path=str(path)) \
            from None
    check_schema(path, meta)
    check_header(path, meta, None)
    keys = meta.get("key_columns")
    if not isinstance(keys, list) or not keys or not all(isinstance(k, str) for k in keys):
        raise DataError("the pricefold metadata has no key_columns (a list of the key columns' names)",
                        path=str(path))
    for name in [*keys, *PARQUET_COLUMNS]:
        if name not in schema.names:
            raise DataError(f"missing the column {name!r}; expected a pricefold results file", path=str(path))
    if any(name in schema.names for name in CYCLE_COLUMNS):  # the next cycle's fields: all of them or none
        for name in (*CYCLE_COLUMNS, "window_coef"):  # and the coefficients they go with
            if name not in schema.names:
                raise DataError(f"missing the column {name!r} (the file holds the other interval parts); expected "
                                "a pricefold results file", path=str(path))
    return meta


# What a signed model's snapshot is made of besides the window coefficients (``candidate_cycle_fields``): a
# file holds every one or none (an older pricefold's holds none).
CYCLE_COLUMNS = ("sigma2", "df", "cov_unscaled", "last_date")


def check_schema(path: Path, document) -> None:
    if document is None and is_parquet_name(path):  # no pricefold header in its metadata
        raise DataError(f"this is not a results file (a data file?): no {SCHEMA!r} schema in it; 'pricefold fit' "
                        "makes results from data", path=str(path))
    if not isinstance(document, dict) or document.get("schema") != SCHEMA:
        found = document.get("schema") if isinstance(document, dict) else type(document).__name__
        raise DataError(f"expected schema {SCHEMA!r}, found {found!r}", path=str(path))


def _read_parquet(path: Path, filters=None, rows: tuple[int, int] | None = None, first: int = 0
                  ) -> tuple[dict, list[dict]]:
    """``(header, series)`` of one Parquet file: every row, those ``filters`` keep, or the file rows
    ``rows`` (``start, stop``: whole series, the first of them series ``first`` of the file)."""
    import pyarrow.parquet as pq
    meta = read_header(path)
    try:
        table = pq.read_table(path, filters=filters, page_checksum_verification=True) if rows is None \
            else _rows(path, *rows)
    except OSError as exc:
        raise DataError(f"cannot read it ({exc.strerror or first_line(exc)})", path=str(path)) from None
    except Exception as exc:  # pyarrow raises several unrelated types for a bad file
        raise DataError(f"expected a pricefold results file ({first_line(exc)})", path=str(path)) from None
    keys = meta["key_columns"]
    series, current = [], None
    offset = rows[0] if rows is not None else 0  # rows are named as the file counts them
    for r, row in enumerate(table.to_pylist(), start=offset):
        key = {k: row[k] for k in keys}
        if current is None or current["key"] != key:
            try:
                flags = json.loads(row["flags"])
            except (TypeError, json.JSONDecodeError):
                raise DataError(f"row {r + 1}: 'flags' should be JSON text of a list of flags", path=str(path)) \
                    from None
            current = {"key": key, "n": row["n"], "price_range": [row["price_lo"], row["price_hi"]],
                       "candidates": [], "chosen": row["chosen"], "rule": meta["settings"]["rule"],
                       "score": row["score"], "flags": flags, "revenue_price": row["revenue_price"],
                       "plan": None, "fingerprint": row["fingerprint"]}
            if row.get("n_weight_0") is not None:  # a weighted fit's
                current = {"key": key, "n": row["n"], "n_weight_0": row["n_weight_0"]} | current
            current.update(series_cycle_fields(row))
            series.append(current)
        cand = {name: row[name] for name in ("candidate", "family", "degree", "available", "reason", "cv_mse", "cv_se",
                                             "fold_mse", "r2", "q2", "coef")}
        cand["name"] = cand.pop("candidate")
        if row["smearing"] is not None:  # families with a smearing factor
            cand["smearing"] = row["smearing"]
        if row["plan_price"] is not None and cand["available"]:  # as the JSON layout has them
            for name in ("plan_volume", "plan_lo", "plan_hi", "plan_elasticity"):
                cand[name] = row[name]
        record_fields(row, cand, current)  # with controls: their fields, as the JSON layout has them
        cand.update(candidate_cycle_fields(row))
        current["candidates"].append(cand)
        if row["is_chosen"] and row["plan_price"] is not None:
            current["plan"] = {"price": row["plan_price"], "volume": row["plan_volume"], "lo": row["plan_lo"],
                               "hi": row["plan_hi"], "level": meta["settings"]["level"],
                               "elasticity": row["plan_elasticity"],
                               "inside_range": _inside(row["price_lo"], row["plan_price"], row["price_hi"])}
    for i, record in enumerate(series, start=first):
        check_series(path, i, record)
    meta.pop("key_columns", None)
    return meta, series


def _rows(path: Path, start: int, stop: int):
    """The rows ``start`` to ``stop`` of a Parquet file, every column: only the row groups holding them read."""
    import pyarrow.parquet as pq
    reader = pq.ParquetFile(path, page_checksum_verification=True)
    groups, first, offset = [], None, 0
    for g in range(reader.metadata.num_row_groups):
        n = reader.metadata.row_group(g).num_rows
        if offset < stop and offset + n > start:
            groups.append(g)
            first = offset if first is None else first
        offset += n
    table = reader.read_row_groups(groups)
    reader.close()
    return table.slice(start - (first or 0), stop - start)


def series_record(path: Path, series: int, n_c: int) -> dict:
    """Series ``series`` (from 0) of the Parquet results file ``path``, ``n_c`` rows a series, as a record
    of the JSON layout: read from the row groups that hold it, checked as ``read_results`` checks."""
    return _read_parquet(Path(path), rows=(series * n_c, (series + 1) * n_c), first=series)[1][0]


def _inside(lo, price, hi) -> bool:
    return None not in (lo, price, hi) and lo <= price <= hi


# -- the next cycle's fields (``results/cycle.py``), where the file holds them -------------------------

def candidate_cycle_fields(row: dict) -> dict:
    if "cov_unscaled" not in row:
        return {}
    if not row["available"]:
        return {"basis": None, "sigma2": None, "df": None, "cov_unscaled": None}
    size = len(row["coef"])
    cov = row["cov_unscaled"]
    return {"basis": row_basis(row["family"], row["price_lo"], row["price_hi"], row["window_coef"][:size]),
            "sigma2": row["sigma2"], "df": row["df"],
            "cov_unscaled": [cov[i * size:(i + 1) * size] for i in range(size)] if cov else None}


def row_basis(family: str, lo, hi, window_coef: list) -> dict:
    """A candidate's curve in its basis as the JSON layout holds it (``basis``), from a Parquet row: its family's
    window over the series' observed prices [``lo``, ``hi``] (the window the fit used) and its ``window_coef``
    (only the candidate's own: the column pads them to the widest candidate's)."""
    from ..fit.families import BY_NAME
    kind = BY_NAME[family]
    mid, half = kind.window_of(np.float64(lo), np.float64(hi), True)
    return {"x": kind.regressor, "mid": float(mid), "half": float(half), "coef": window_coef}


def series_cycle_fields(row: dict) -> dict:
    out = {}
    if "last_date" in row:
        out["last_date"] = row["last_date"].isoformat() if row["last_date"] is not None else None
    if "backtest_status" in row:
        out["backtest"] = None if row["backtest_status"] is None else \
            {name[len("backtest_"):]: value for name, value in row.items() if name.startswith("backtest_")}
    return out
