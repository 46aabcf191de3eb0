"""Writing results files: JSON for small runs, Parquet for large ones.

Both carry ``pricefold-results/1``; the README documents the fields.  Files
are written with the project's one atomic writer (``fitcore.outputs``), so an
interrupted run never leaves a half-written results file.
"""
from __future__ import annotations

import json
import math
from pathlib import Path

from ..data.columns import is_parquet_name
from ..errors import DataError
from ..fit.results import SCHEMA, Results
from ..outputs import atomic_write
from . import control_fields, cycle
from .table import ResultsTable, power_coef_table


def header(results: Results, diagnosis=None, backtest=None) -> dict:
    settings = results.settings.as_dict()
    if diagnosis is not None:
        settings["thresholds"] = diagnosis.thresholds.as_dict()
    if results.controls is not None:
        settings["controls"] = control_fields.header_settings(results)
    return {"schema": SCHEMA, "settings": settings, "input": dict(results.data.source)} | cycle.header_extras(backtest)


def _flag_lists(results: Results, diagnosis) -> list[list[dict]]:
    if diagnosis is None:
        return [[] for _ in range(results.n_series)]
    any_flag = diagnosis.raised.any(axis=1)
    return [diagnosis.flags_of(s) if any_flag[s] else [] for s in range(results.n_series)]


def _num(value) -> float | None:
    value = float(value)
    return value if math.isfinite(value) else None


def series_records(results: Results, diagnosis=None, backtest=None) -> list[dict]:
    """One JSON-ready dict per series (the ``series`` list of a results file)."""
    data, names = results.data, results.names
    coef = power_coef_table(results)
    fingerprints = data.fingerprints
    score = results.score
    flags = _flag_lists(results, diagnosis)
    zero = results.weight_0
    smeared = [results.family_of(c).smeared for c in range(len(results.candidates))]
    cand_extras, series_extras = cycle.json_candidate_extras(results), cycle.json_series_extras(results, backtest)
    records = []
    for s in range(results.n_series):
        folds = results.folds_of(s)
        candidates = []
        for c, cand in enumerate(results.candidates):
            ok = bool(results.available[s, c])
            size = cand.complexity
            entry = {"name": cand.name, "family": cand.family, "degree": cand.degree, "available": ok,
                     "reason": results.reason_text(s, c),
                     "cv_mse": _num(results.cv_mse[s, c]) if ok else None,
                     "cv_se": _num(results.cv_se[s, c]) if ok else None,
                     "fold_mse": [_num(v) for v in folds[:, c]] if ok else [],
                     "r2": _num(results.r2[s, c]) if ok else None,
                     "q2": _num(results.q2[s, c]) if ok else None,
                     "coef": [_num(v) for v in coef[s, c, :size]] if ok else None}
            if smeared[c]:
                entry["smearing"] = _num(results.smear[s, c]) if ok else None
            if ok and math.isfinite(results.plan_price[s]):  # every candidate's numbers at the plan, as Parquet has
                entry["plan_volume"] = _num(results.plan_volume[s, c])
                entry["plan_lo"], entry["plan_hi"] = _num(results.plan_lo[s, c]), _num(results.plan_hi[s, c])
                entry["plan_elasticity"] = _num(results.plan_elasticity[s, c])
            if results.controls is not None:
                entry["controls"] = control_fields.candidate_controls(results.controls, s, c, ok)
            entry.update(cand_extras(s, c, ok))  # the next cycle's fields (results/cycle.py)
            candidates.append(entry)
        chosen = int(results.chosen[s])
        records.append({
            "key": data.key_of(s), "n": int(data.counts[s]),
            **({} if zero is None else {"n_weight_0": int(zero[s])}),  # a weighted fit: its rows of weight 0
            "price_range": [_num(results.price_lo[s]), _num(results.price_hi[s])],
            "candidates": candidates,
            "chosen": names[chosen] if chosen >= 0 else None,
            "rule": results.settings.rule,
            "score": _num(score[s]),
            "flags": flags[s],
            "revenue_price": _num(results.revenue_price[s]),
            "plan": _plan_record(results, s, chosen),
            "fingerprint": fingerprints[s],
        } | series_extras(s))  # the next cycle's fields (results/cycle.py)
        if results.controls is not None:
            records[-1].update(control_fields.series_controls(results.controls, s))
    return records


def _plan_record(results: Results, s: int, chosen: int) -> dict | None:
    """The plan price and the chosen candidate's numbers there; without a chosen candidate the price alone
    (its numbers null), as the Parquet rows hold it and the report shows it."""
    price = results.plan_price[s]
    if not math.isfinite(price):
        return None
    at = (lambda values: _num(values[s, chosen])) if chosen >= 0 else (lambda values: None)  # noqa: E731
    return {"price": _num(price), "volume": at(results.plan_volume), "lo": at(results.plan_lo),
            "hi": at(results.plan_hi), "level": results.settings.level, "elasticity": at(results.plan_elasticity),
            "inside_range": bool(results.price_lo[s] <= price <= results.price_hi[s])}


def write_results(results: Results, path: str | Path, diagnosis=None, *, batch=None, backtest=None) -> Path:
    """Write ``results`` (and the flags of ``diagnosis``, the ``backtest`` against a ledger) as JSON or
    Parquet, by the file name's ending.

    ``batch``: an ``outputs.Batch`` to stage the file in (put in place with the batch's other files).
    """
    path = Path(path)
    write, by_name = prepared_results(results, path, diagnosis, backtest)
    (batch.add if batch is not None else atomic_write)(path, write, by_name=by_name)
    return path


def prepared_results(results: Results, path: Path, diagnosis=None, backtest=None):
    """``write_results``' file prepared now, to be written later: ``(write, by_name)`` for ``outputs.stage``.

    JSON: the document built now; holds no reference to ``results``.  Parquet: what is per series (keys,
    fingerprints, the flags that quote an observation, the backtest) made now, so ``backtest`` and the
    diagnosis' rows are not kept; the table is built slice by slice while the file is written
    (``write_parquet_slices``), the other flags' texts with it: it holds ``results``, the rows the table still
    needs (prices, weights) and the diagnosis' flags and numbers (``ResultsTable``)."""
    if path.suffix.lower() == ".json":
        document = header(results, diagnosis, backtest) | {"series": series_records(results, diagnosis, backtest)}
        payload = json.dumps(document, ensure_ascii=False, allow_nan=False, indent=None,
                             separators=(",", ":")).encode("utf-8")
        return (lambda handle: handle.write(payload)), False
    if is_parquet_name(path):
        table = ResultsTable(results, header(results, diagnosis, backtest), diagnosis, backtest)
        return (lambda name: _write_named(table.slices(), name)), True
    raise DataError(f"expected the results file to end in .json or .parquet, got {path.name!r}", path=str(path))


def results_table(results: Results, diagnosis=None, backtest=None):
    """The Parquet layout, whole: one row per series × candidate; the header in the schema metadata."""
    return ResultsTable(results, header(results, diagnosis, backtest), diagnosis, backtest).whole()


# Values the Parquet writer takes at a time (pyarrow's default 1,024): between two batches it checks whether
# the page is full, so a page can pass the 1 MiB page size by one batch (≤ 512 KiB of doubles).  The 7M rows'
# 25 slices encoded alone: 0.70–0.71 → 0.62–0.66 s CPU (fewer calls a page); the values, and what every
# reader reads, the same.
WRITE_BATCH = 1 << 16


def _parquet_options(schema) -> dict:
    """How results are written.  Dictionary pages only for text: on numbers they cost half the write time
    and save nothing.  No column statistics: no reader here uses them (every reader reads whole files),
    and they cost 10% of the write.  A CRC-32 on every page, which every reader checks
    (``page_checksum_verification``): a flipped bit in a number is an error, not a quietly wrong number."""
    import pyarrow as pa
    text = [field.name for field in schema if pa.types.is_dictionary(field.type) or pa.types.is_string(field.type)]
    return {"compression": "snappy", "use_dictionary": text, "write_statistics": False, "write_page_checksum": True,
            "write_batch_size": WRITE_BATCH}


def write_parquet(table, where) -> None:
    """Write a results table (``results_table``) to a path or an open binary file."""
    import pyarrow.parquet as pq
    pq.write_table(table, where, **_parquet_options(table.schema))


def write_parquet_slices(slices, where, written=None) -> None:
    """Write a results table given slice by slice (``ResultsTable.slices``: one schema) to a path or an open
    binary file, each slice its own row group, written in a thread while the next slice is built (pyarrow
    writes without holding the interpreter): at most two slices in memory, the build's time and the
    write's overlapping.  ``written``: called in that thread after each slice is written."""
    from concurrent.futures import ThreadPoolExecutor

    import pyarrow.parquet as pq

    def write(table) -> None:
        writer.write_table(table)
        if written is not None:
            written()

    try:
        slices = iter(slices)
        first = next(slices)
        schema = first.schema
        with pq.ParquetWriter(where, schema, **_parquet_options(schema)) as writer, \
                ThreadPoolExecutor(1, thread_name_prefix="pricefold-write") as pool:
            pending = pool.submit(write, first)
            del first
            for table in slices:  # built while the one before is written
                pending.result()  # written (or its error raised here)
                pending = pool.submit(write, table if table.schema.equals(schema) else table.cast(schema))
                del table
            pending.result()
    finally:
        if written is not None and hasattr(written, "close"):
            written.close()


def _write_named(slices, name: str) -> None:
    """Write around the page cache where the file system can (``outputs.direct``: 7M rows' 164 MB in a tenth
    of the time), else through pyarrow's own file (no Python call per write), opened as a local file by name (a
    path is never taken for a URI), each row group handed to the disk at once (``early_writeback``), so the
    fsync that follows waits for the last ones only."""
    import pyarrow as pa

    from ..outputs.direct import direct_file
    direct = direct_file(name)
    if direct is not None:
        try:
            write_parquet_slices(slices, direct)
        except BaseException:
            direct.discard()
            raise
        direct.close()
        return
    with pa.OSFile(name, "wb") as sink:
        write_parquet_slices(slices, sink, early_writeback(name))


def early_writeback(name: str):
    """A function starting the disk's write of what is written to ``name`` so far, without waiting for it
    (Linux ``sync_file_range`` with ``SYNC_FILE_RANGE_WRITE``), or None where there is none.  Not a sync:
    the atomic writer's fsync still makes the file durable; it only finds less left to write (7M rows' 164 MB:
    the fsync after the write 0.20–0.36 s → 0.17–0.19 s in the runs measured)."""
    import ctypes
    import os
    try:
        call = ctypes.CDLL(None, use_errno=True).sync_file_range
    except (OSError, AttributeError):
        return None
    call.argtypes = [ctypes.c_int, ctypes.c_int64, ctypes.c_int64, ctypes.c_uint]
    try:
        fd = os.open(name, os.O_RDONLY | getattr(os, "O_CLOEXEC", 0))
    except OSError:  # the write itself will say what is wrong
        return None
    done = [0]

    def start() -> None:
        end = os.fstat(fd).st_size
        if end > done[0]:
            call(fd, done[0], end - done[0], 2)  # SYNC_FILE_RANGE_WRITE; a failure leaves it to the fsync
            done[0] = end
    start.close = lambda: os.close(fd)
    return start
