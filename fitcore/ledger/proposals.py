"""What ``ledger accept-unflagged`` signs: each series with no flag and a proposal, with the snapshot of
its proposed model, read from a results file.

A Parquet results file (or a folder of parts) is read column by column: only the columns a snapshot
needs, the proposed candidate's row picked per series with numpy, the snapshots made per candidate in one
``snapshot.snapshots`` call each — no Python object per row (reading 700,000 rows as records, as
``results.read`` does for ``show``, took 30 s and 3 GB).  What it signs is what that reader gives:
``from_records`` of the same records (a test compares every field).

It checks what the record reader checks before it trusts a value, conservatively: when anything is not
as pricefold writes it (a column of another type, a null where a value is due, a flag list that is not
one, a proposal that is not among the series' candidates, …) it leaves the file to the record reader,
which names the problem in one line as it always did.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from ..arrays import numbers, objects
from ..data.columns import is_parquet_name
from ..errors import DataError
from ..results.checks import SEVERITIES
from ..results.control_fields import cov_known
from ..results.read import CYCLE_COLUMNS, read_header, result_parts
from .snapshot import fit_terms, from_records, header_terms, snapshots

# (key, fingerprint, proposed candidate, signed snapshot) of one series
Proposal = tuple[dict, str, str, dict]
NO_PARTS = "holds no interval parts to sign with (written by an older pricefold); fit again"


def unflagged(path: str | Path, ledger_path: Path | None = None) -> tuple[dict, list[Proposal]]:
    """``(header, proposals)``: every series of the results at ``path`` with no flag and a proposal, in
    file order.  ``DataError`` (one line) for a damaged file, or one without interval parts to sign.
    Results backtested against another ledger than ``ledger_path`` (``elsewhere.backtested_elsewhere``): their
    ``shifted`` flags, of that ledger's signed curves, are not counted (as ``show --ledger`` leaves them out)."""
    path = Path(path)
    parts = result_parts(path)
    if parts is not None or is_parquet_name(path):
        read = _columnwise(path, parts or [path], ledger_path)
        if read is not None:
            return read
    return _by_records(path, ledger_path)


def _ignored(path: Path, header: dict, ledger_path: Path | None) -> frozenset[str]:
    """The flag codes not counted: ``shifted`` where the backtest was made against another ledger."""
    from .elsewhere import backtested_elsewhere
    return frozenset({"shifted"}) if ledger_path and backtested_elsewhere(path, header, ledger_path) else frozenset()


def _by_records(path: Path, ledger_path: Path | None = None) -> tuple[dict, list[Proposal]]:
    """Through the record reader (``results.read``): a JSON results file, or a file the column reader left."""
    from ..results.read import results_in_parts
    header, parts = results_in_parts(path)
    ignored = _ignored(path, header, ledger_path)
    chosen = [record for part in parts for record in part
              if not any(flag["code"] not in ignored for flag in record["flags"]) and record["chosen"]]
    if any("basis" not in c for record in chosen for c in record["candidates"] if c["name"] == record["chosen"]):
        raise DataError(NO_PARTS, path=str(path))
    signed = from_records([(record, record["chosen"]) for record in chosen], header["settings"].get("level", 0.95),
                          header_terms(header["settings"]), cov_known(header["settings"]), fit_terms(header["settings"]))
    return header, [(record["key"], record["fingerprint"], record["chosen"], snapshot)
                    for record, snapshot in zip(chosen, signed)]


class _Doubt(Exception):
    """Something the column reader does not vouch for: the record reader reads the file instead."""


# The columns read, and the Arrow types each may have (what pricefold writes); the rest of the columns the
# record reader checks are checked by type only (any number, or text).
_NUMBER, _TEXT = "number", "text"
_READ = {"n": "integer", "price_lo": _NUMBER, "price_hi": _NUMBER, "candidate": _TEXT, "family": _TEXT,
         "available": "bool", "coef": "numbers", "window_coef": "numbers", "smearing": _NUMBER, "is_chosen": "bool",
         "chosen": _TEXT, "plan_price": _NUMBER, "flags": _TEXT, "fingerprint": _TEXT, "cv_mse": _NUMBER,
         "sigma2": _NUMBER, "df": "integer", "cov_unscaled": "numbers", "last_date": "date"}
_TYPED = {"cv_se": _NUMBER, "r2": _NUMBER, "q2": _NUMBER, "plan_volume": _NUMBER, "plan_lo": _NUMBER,
          "plan_hi": _NUMBER, "plan_elasticity": _NUMBER, "score": _NUMBER, "revenue_price": _NUMBER}


def _columnwise(path: Path, parts: list[Path], ledger_path: Path | None = None
                ) -> tuple[dict, list[Proposal]] | None:
    """The proposals of a Parquet file or folder, or None when the record reader must read it."""
    import pyarrow as pa

    from ..fit.families import BY_NAME
    header = read_header(path)
    header.pop("key_columns", None)
    ignored = _ignored(path, header, ledger_path)
    try:
        pieces = [_part(part, ignored) for part in parts]
    except _Doubt:
        return None
    finally:
        pa.default_memory_pool().release_unused()  # what the reads held goes back (0.2 GB at 700,000 rows)
    if not pieces or not sum(len(piece["name"]) for piece in pieces):
        return header, []
    picked = {name: _stack([piece[name] for piece in pieces]) for name in pieces[0]}
    settings = header["settings"]
    level, terms = settings.get("level", 0.95), header_terms(settings)
    out: list[dict | None] = [None] * len(picked["name"])
    groups: dict[str, list[int]] = {}
    for i, name in enumerate(picked["name"].tolist()):
        groups.setdefault(name, []).append(i)
    for name, members in groups.items():  # one call per proposed candidate, as ``from_records`` makes them
        at = np.asarray(members, dtype=np.int64)
        family = picked["family"][at[0]]
        if (picked["family"][at] != family).any() or (picked["size"][at] != picked["size"][at[0]]).any():
            return None  # the record reader fails on these as it always did
        k = int(picked["size"][at[0]])
        mid, half = BY_NAME[family].window_of(picked["cand_lo"][at], picked["cand_hi"][at], True)
        made = snapshots(name, family, level, coef=picked["window_coef"][at, :k], mid=mid, half=half,
                         smear=picked["smearing"][at], cov=picked["cov"][at, :k * k].reshape(len(at), k, k),
                         sigma2=picked["sigma2"][at], df=picked["df"][at], n=picked["n"][at], lo=picked["lo"][at],
                         hi=picked["hi"][at], last_date=[picked["last_date"][i] for i in members],
                         plan_price=picked["plan_price"][at], cv_mse=picked["cv_mse"][at], controls=terms,
                         cov_known=cov_known(settings), fitted=fit_terms(settings))
        for i, snapshot in zip(members, made):
            out[i] = snapshot
    keys, prints = picked["key"].tolist(), picked["fingerprint"].tolist()
    return header, list(zip(keys, prints, picked["name"].tolist(), out))


def _part(part: Path, ignored: frozenset[str] = frozenset()) -> dict:
    """One part's unflagged series with a proposal: arrays of what their snapshots are made of."""
    import pyarrow.parquet as pq
    meta = read_header(part)
    key_names = meta["key_columns"]
    try:
        reader = pq.ParquetFile(part, page_checksum_verification=True)
        schema = reader.schema_arrow
        if not all(name in schema.names for name in CYCLE_COLUMNS):
            raise _Doubt  # an older file: the record reader says what is missing
        for name, kind in [*((k, _TEXT) for k in key_names), *_READ.items(), *_TYPED.items()]:
            if not _typed(schema.field(name).type, kind):
                raise _Doubt
        table = reader.read(columns=[*key_names, *(n for n in _READ if n not in _CELLS)])
        picked, at = _pick(table, key_names, ignored)
        return _with_cells(picked, _cells(reader, at))
    except _Doubt:
        raise
    except Exception:  # pyarrow raises several unrelated types for a bad file: the record reader says which
        raise _Doubt from None


# The largest columns: read a batch of rows at a time, only the proposed candidates' cells kept.
_CELLS = ("coef", "window_coef", "cov_unscaled", "smearing", "sigma2", "df", "cv_mse")
_BATCH = 1 << 16


def _cells(reader, rows: np.ndarray) -> dict:
    """The ``_CELLS`` columns at ``rows`` (ascending), read ``_BATCH`` rows at a time (the whole columns of
    700,000 rows would hold 0.3 GB, and more while they are decoded)."""
    import pyarrow as pa
    taken, start = {name: [] for name in _CELLS}, 0
    for batch in reader.iter_batches(batch_size=_BATCH, columns=list(_CELLS)):
        lo, hi = np.searchsorted(rows, [start, start + batch.num_rows])
        if hi > lo:
            for name in _CELLS:
                taken[name].append(batch.column(name).take(_indices(rows[lo:hi] - start)))
        start += batch.num_rows
    return {name: pa.concat_arrays(arrays) if arrays else pa.array([], type=reader.schema_arrow.field(name).type)
            for name, arrays in taken.items()}


def _with_cells(picked: dict, cell: dict) -> dict:
    """The proposed candidates' coefficients, covariances and cell numbers beside what ``_pick`` read."""
    if any(cell[name].null_count for name in ("window_coef", "coef")):
        raise _Doubt
    size = _lengths(cell["coef"])
    kind = cell["window_coef"].type
    window = _matrix(cell["window_coef"], kind.list_size if hasattr(kind, "list_size") else None)
    if (size > window.shape[1]).any():
        raise _Doubt
    cov = _matrix(cell["cov_unscaled"], int((size ** 2).max(initial=1)), square=size)
    numbers_of = {name: numbers(cell[name]).astype(float) for name in ("smearing", "sigma2", "df", "cv_mse")}
    return {**picked, "size": size, "window_coef": window, "cov": cov, **numbers_of}


def _typed(kind, expected: str) -> bool:
    import pyarrow as pa
    if pa.types.is_dictionary(kind):
        kind = kind.value_type
    if expected == _TEXT:
        return pa.types.is_string(kind) or pa.types.is_large_string(kind)
    if expected == "numbers":
        return (pa.types.is_list(kind) or pa.types.is_fixed_size_list(kind)) and pa.types.is_floating(kind.value_type)
    return {_NUMBER: pa.types.is_floating, "integer": pa.types.is_integer, "bool": pa.types.is_boolean,
            "date": pa.types.is_date32}[expected](kind)


def _pick(table, key_names: list[str], ignored: frozenset[str] = frozenset()) -> tuple[dict, np.ndarray]:
    """What the series' own rows say (keys, flags, proposals, counts, ranges, dates, plan prices) for the
    unflagged series (flags ``ignored`` not counted) with a proposal; and their proposed candidates' rows."""
    rows = table.num_rows
    column = {name: table.column(name).combine_chunks() for name in table.column_names}
    keys = {name: objects(column[name]) for name in key_names}
    candidate, chosen = objects(column["candidate"]), objects(column["chosen"])
    available = column["available"]
    if any(_nulls(column[name]) for name in (*key_names, "candidate", "available", "is_chosen")):
        raise _Doubt
    # A series is a run of rows with one key (as the record reader groups them); its first row holds the
    # series' own fields.
    starts = np.zeros(rows, dtype=bool)
    starts[:1] = True
    for values in keys.values():
        starts[1:] |= values[1:] != values[:-1]
    series = np.cumsum(starts) - 1
    first = np.flatnonzero(starts)
    n = numbers(column["n"])
    if _nulls(column["n"], first) or (n[first] < 0).any():
        raise _Doubt
    if _nulls(column["fingerprint"], first) or _nulls(column["flags"], first):
        raise _Doubt
    proposal = chosen[first]
    # the proposed candidate's row: the first of the series' rows with that name (every proposal must have one)
    matches = np.flatnonzero(candidate == proposal[series])
    lead = matches[np.r_[True, series[matches][1:] != series[matches][:-1]]] if len(matches) else matches
    row_of = np.full(len(first), -1, dtype=np.int64)
    row_of[series[lead]] = lead
    if ((row_of < 0) & (proposal != None)).any():  # noqa: E711  (elementwise)
        raise _Doubt
    wanted = np.flatnonzero(_no_flags(objects(column["flags"].take(_indices(first))), ignored) & (proposal != None)  # noqa
                            & (proposal != ""))
    at = row_of[wanted]
    if not numbers(available)[at].all() or _nulls(column["family"], at):
        raise _Doubt
    families = objects(column["family"].take(_indices(at)))
    from ..fit.families import BY_NAME
    if any(name not in BY_NAME for name in set(families.tolist())):
        raise _Doubt
    lead_rows = first[wanted]
    plan = _plan_prices(column, series, wanted, len(first))
    key_dicts = [dict(zip(key_names, values)) for values in zip(*(keys[k][lead_rows].tolist() for k in key_names))]
    dates = column["last_date"].take(_indices(lead_rows)).to_pylist()
    return {"key": _object_array(key_dicts), "fingerprint": objects(column["fingerprint"].take(_indices(lead_rows))),
            "name": proposal[wanted], "family": families,
            "cand_lo": _floats(column["price_lo"], at), "cand_hi": _floats(column["price_hi"], at),
            "n": n[lead_rows].astype(np.int64),
            "lo": _floats(column["price_lo"], lead_rows), "hi": _floats(column["price_hi"], lead_rows),
            "last_date": _object_array([None if d is None else d.isoformat() for d in dates]), "plan_price": plan}, at


def _stack(arrays: list[np.ndarray]) -> np.ndarray:
    """The parts' arrays one after the other (matrices padded with NaN to the widest)."""
    if arrays[0].ndim == 2:
        width = max(a.shape[1] for a in arrays)
        arrays = [np.pad(a, ((0, 0), (0, width - a.shape[1])), constant_values=np.nan) for a in arrays]
    return np.concatenate(arrays) if len(arrays) > 1 else arrays[0]


def _indices(rows: np.ndarray):
    from ..arrays import integers
    return integers(rows)


def _nulls(array, rows: np.ndarray | None = None) -> bool:
    if rows is not None:
        array = array.take(_indices(rows))
    return bool(array.null_count)


def _floats(array, rows: np.ndarray) -> np.ndarray:
    return numbers(array.take(_indices(rows))).astype(float)


def _object_array(values: list) -> np.ndarray:
    out = np.empty(len(values), dtype=object)
    out[:] = values
    return out


def _no_flags(texts: np.ndarray, ignored: frozenset[str] = frozenset()) -> np.ndarray:
    """Whether each series' flag list (JSON text) is empty but for codes ``ignored``; each distinct text parsed
    and checked once."""
    verdict = {}
    for text in set(texts.tolist()):
        try:
            flags = json.loads(text)
        except (TypeError, ValueError):
            raise _Doubt from None
        if not isinstance(flags, list) or not all(
                isinstance(flag, dict) and isinstance(flag.get("code"), str) and flag.get("severity") in SEVERITIES
                and isinstance(flag.get("message"), str) for flag in flags):
            raise _Doubt
        verdict[text] = not any(flag["code"] not in ignored for flag in flags)
    return np.array([verdict[text] for text in texts.tolist()], dtype=bool)


def _lengths(lists) -> np.ndarray:
    import pyarrow as pa
    if pa.types.is_fixed_size_list(lists.type):
        return np.full(len(lists), lists.type.list_size, dtype=np.int64)
    offsets = numbers(lists.offsets).astype(np.int64)
    return np.diff(offsets)


def _matrix(lists, width: int | None, square: np.ndarray | None = None) -> np.ndarray:
    """Lists of numbers as rows of a matrix (NaN past each list's end; nulls as NaN rows).  ``square``: each
    row's size k, the list holding k·k numbers or none (empty or null), else the record reader decides."""
    lengths = _lengths(lists)
    if lists.null_count:
        valid = numbers(lists.is_valid())
        lengths = np.where(valid.astype(bool), lengths, 0)
    else:
        valid = None
    if square is not None and not ((lengths == 0) | (lengths == square * square)).all():
        raise _Doubt
    width = int(lengths.max(initial=0)) if width is None else width
    out = np.full((len(lists), max(width, 1)), np.nan)
    values = numbers(lists.flatten())
    if len(values) != lengths.sum():
        raise _Doubt
    rows = np.repeat(np.arange(len(lists)), lengths)
    starts = np.cumsum(lengths) - lengths
    out[rows, np.arange(len(values)) - np.repeat(starts, lengths)] = values
    return out


def _plan_prices(column: dict, series: np.ndarray, wanted: np.ndarray, n_series: int) -> np.ndarray:
    """Each wanted series' plan price: that of its proposed row (``is_chosen``), NaN without one."""
    price = numbers(column["plan_price"])
    rows = np.flatnonzero(numbers(column["is_chosen"]).astype(bool) & ~np.isnan(price))
    if len(np.unique(series[rows])) != len(rows):
        raise _Doubt  # two rows marked chosen in a series
    out = np.full(n_series, np.nan)
    out[series[rows]] = price[rows]
    return out[wanted]
