"""The batch engine on a Dask cluster, for inputs too big for one machine.

``fit_batch`` is a pure function of whole series, so the work is: read the
input in pieces (a CSV file, or each row group of each Parquet file), check
every row as the local loader does, send each usable row to the partition
its series' key hash picks, then fit, diagnose and write each partition on
its own.  Every series lands whole in exactly one partition; fold shuffles
are keyed by the series, and rows are put back in input order before
fitting, so the numbers equal the local engine's whatever the number of
workers or partitions.  Repeated series-and-date rows are found after the
shuffle, where all rows of a series meet.

Only the coordinating functions import dask; the pieces run in workers.
"""
from __future__ import annotations

import json
import shutil
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..data.columns import Columns, file_sha256
from ..errors import DataError, SettingsError, first_line

SUMMARY = "_summary.json"  # beside the part files; Parquet readers skip names starting with "_"
CONTROL = "_control:"  # a control column's field in the pieces' tables
REJECTS = "rejects.csv"


@dataclass(frozen=True)
class Piece:
    """A slice of the input read by one task: a whole CSV file, or one row group of a Parquet file."""

    path: str
    row_group: int | None
    first_line: int  # line (CSV, header = 1) or row number (Parquet, from 1) of the piece's first row
    folder_keys: tuple = ()  # (column, text) pairs a partitioned folder's names give the file's rows (``region=East``)


def pieces_of(path: Path, columns: Columns) -> list[Piece]:
    """The pieces of ``path``, in the order the local loader reads its rows (so line numbers agree)."""
    import pyarrow.parquet as pq

    from ..data.loader import check_columns, file_kind
    from ..data.read_parquet import parquet_names
    from ..data.textfile import check_file
    check_file(path)
    if not path.is_dir() and file_kind(path)[0] == "csv":
        return [Piece(str(path), None, 2)]
    parquet_names(path)  # one clear error for a folder without Parquet files or an unreadable file
    if path.is_dir():  # the files in the order the local loader reads them, each with its folder names' columns
        import pyarrow.dataset as ds

        from ..data.read_parquet import folder_partitioning
        fragments = pq.ParquetDataset(path, partitioning=folder_partitioning(path)).fragments
        files = [(fragment.path, tuple(ds.get_partition_keys(fragment.partition_expression).items()))
                 for fragment in fragments]
    else:
        files = [(str(path), ())]
    out, line = [], 1
    for name, folder_keys in files:
        try:
            meta = pq.ParquetFile(name).metadata
        except (OSError, ValueError) as exc:
            raise DataError(f"not a readable Parquet file ({first_line(exc)})", path=name) from None
        check_columns(Path(name), [*meta.schema.to_arrow_schema().names, *dict(folder_keys)], columns)
        for group in range(meta.num_row_groups):
            out.append(Piece(name, group, line, folder_keys))
            line += meta.row_group(group).num_rows
    if line == 1:
        raise DataError("expected at least one observation, found none", path=str(path))
    return out


def read_piece(piece: Piece, columns: Columns, n_parts: int, sep: str | None = None):
    """``(tables, lines, reasons, n_rows)``: the piece's usable rows as one Arrow table per partition,
    and the lines and reasons of its rejected rows."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    from ..data.cells import raw_from_table
    from ..data.loader import read_rows
    from ..data.validation import reasons
    if piece.row_group is None:
        rows, _, _ = read_rows(Path(piece.path), columns, sep)
    else:
        given = dict(piece.folder_keys)
        table = pq.ParquetFile(piece.path, page_checksum_verification=True).read_row_group(
            piece.row_group, columns=[name for name in columns.needed if name not in given])
        for name, text in given.items():  # the folder's name for every row, as the local loader reads it
            table = table.append_column(name, pa.DictionaryArray.from_arrays(
                pa.array(np.zeros(table.num_rows, dtype=np.int32)), pa.array([text], pa.string())))
        rows = raw_from_table(table, columns, piece.first_line + np.arange(table.num_rows, dtype=np.int64))
    why, usable = reasons(rows, columns.price, columns.volume, columns.weight, columns.date, duplicates=False,
                          controls=columns.controls)
    keep = np.flatnonzero(usable)
    keys = {name: np.asarray(rows.keys[name], dtype=object)[keep].astype(str) for name in columns.keys}
    part = partition_of(keys, n_parts)
    fields = {**keys, "_price": rows.numbers[columns.price][0][keep], "_volume": rows.numbers[columns.volume][0][keep],
              "_line": rows.line[keep]}
    if columns.weight:
        fields["_weight"] = rows.numbers[columns.weight][0][keep]
    if columns.date:
        fields["_date"] = rows.date[0][keep]
    for name in columns.controls:
        fields[CONTROL + name] = rows.numbers[name][0][keep]
    table = pa.table(fields)
    order = np.argsort(part, kind="stable")
    bounds = np.searchsorted(part[order], np.arange(n_parts + 1))
    tables = [table.take(order[bounds[p]:bounds[p + 1]]) for p in range(n_parts)]
    bad = np.flatnonzero(~usable)
    return tables, rows.line[bad], why[bad].tolist(), rows.n_rows


def partition_of(keys: dict[str, np.ndarray], n_parts: int) -> np.ndarray:
    """(N,) the partition of each row: its series' key hash (``Dataset.key_hash``) modulo ``n_parts``."""
    from ..data.dataset import hash_keys
    return (hash_keys(keys) % np.uint64(n_parts)).astype(np.int64)


@dataclass(frozen=True)
class PartJob:
    """What every partition's task needs besides its rows."""

    columns: Columns
    settings: object  # FitSettings
    thresholds: object  # Thresholds
    plan_file: str | None
    plan_price: float | None
    source: dict  # the input as the results header records it
    out: str  # the results folder
    sep: str | None = None
    control_binary: dict | None = None  # each control column: 0/1 over the whole input (every piece)
    ledger: dict | None = None  # the ledger backtested against (path, head), with ``fit --ledger``


def gather_part(tables: list, columns: Columns):
    """Partition rows from every piece, back in input order, less rows repeating an earlier row's series
    and date: ``(table, lines, reasons)`` of what remains and of what was set aside."""
    import pyarrow as pa

    from ..data.validation import duplicate_reason, duplicate_rows
    table = pa.concat_tables(tables)
    table = table.take(np.argsort(table.column("_line").to_numpy(), kind="stable"))
    if not columns.date or table.num_rows == 0:
        return table, [], []
    lines = table.column("_line").to_numpy()
    codes = [np.unique(table.column(name).to_numpy(zero_copy_only=False).astype(str), return_inverse=True)[1]
             for name in columns.keys]
    dates = table.column("_date").to_numpy(zero_copy_only=False).astype("datetime64[ns]")
    dropped, earlier = duplicate_rows(codes, dates, lines)
    keep = np.setdiff1d(np.arange(table.num_rows), dropped)
    return table.take(keep), lines[dropped].tolist(), [duplicate_reason(int(line)) for line in earlier]


def fit_part(p: int, table, job: PartJob, standing=None) -> dict:
    """Fit, diagnose and write partition ``p`` (``part-p.parquet``); a small summary for the client.
    ``standing``: this partition's standing decisions (``ledger.standing.by_partition``) with ``fit --ledger``."""
    from ..data.dataset import from_columns
    from ..data.plan import plan_keywords
    from ..fit.engine import fit_batch
    from ..results.write import results_table, write_parquet
    from ..review.flags import diagnose
    if table.num_rows == 0:
        return {"series": 0, "rows": 0, "none": 0, "clean": 0, "chosen": {}, "flags": {}, "plan_matched": 0,
                "backtest": {}, "shifted": 0}

    def column(name):
        return table.column(name).to_numpy(zero_copy_only=False) if name in table.column_names else None

    data = from_columns({name: column(name).astype(object) for name in job.columns.keys}, column("_price"),
                        column("_volume"), weight=column("_weight"), date=column("_date"), line=column("_line"),
                        source=job.source, controls={name: column(CONTROL + name) for name in job.columns.controls},
                        control_binary=job.control_binary)
    plan = plan_keywords(data, job.plan_file, job.plan_price, season=job.settings.season, partial=True)  # its own delimiter
    results = fit_batch(data, job.settings, **plan, threads=1)  # Dask's workers are the parallelism
    diagnosis = diagnose(results, job.thresholds)
    found = None
    if job.ledger is not None:  # signed curves against the rows since, and the shifted flag
        from ..ledger.backtest import backtest
        from ..review.flags import mark_shifted
        found = backtest(results, standing if standing is not None else {}, job.thresholds, job.ledger)
        diagnosis = mark_shifted(diagnosis, found)
    write_parquet(results_table(results, diagnosis, found), Path(job.out) / f"part-{p:05d}.parquet")
    chosen = np.bincount(results.chosen[results.chosen >= 0], minlength=len(results.names))
    return {"series": results.n_series, "rows": data.n_rows, "none": int((results.chosen < 0).sum()),
            "clean": int((~diagnosis.raised.any(axis=1)).sum()), "flags": diagnosis.counts(),
            "chosen": {name: int(n) for name, n in zip(results.names, chosen) if n},
            "plan_matched": int(np.isfinite(results.plan_price).sum()) if job.plan_file else 0,
            "backtest": {} if found is None else found.counts(),
            "shifted": 0 if found is None else int(found.shifted.sum())}


def worker_environment() -> dict[str, str]:
    """Environment for worker processes this module starts.

    Dask sets ``MALLOC_TRIM_THRESHOLD_=65536`` in workers by default; measured here it made
    numpy 1.8× slower (large arrays given back to the system and faulted in again on every chunk),
    so it is raised to glibc's own ceiling.  One thread per worker process: the engine is
    single-threaded and several BLAS or numba threads per process only compete for the cores.
    """
    return {"MALLOC_TRIM_THRESHOLD_": str(32 * 2 ** 20), "OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1",
            "MKL_NUM_THREADS": "1", "NUMBA_NUM_THREADS": "1"}


def connect(scheduler: str | None, workers: int):
    """A Dask client: to ``scheduler`` if given, else to a new local cluster of ``workers`` processes."""
    try:
        import dask
        from distributed import Client, LocalCluster
    except ImportError:
        raise SettingsError("--engine dask needs Dask: pip install 'pricefold[scale]'") from None
    if scheduler:
        try:
            return Client(scheduler, timeout="20s")
        except OSError as exc:
            raise SettingsError(f"cannot reach the Dask scheduler at {scheduler} ({exc})") from None
    environ = worker_environment()
    dask.config.set({f"distributed.nanny.pre-spawn-environ.{k}": v for k, v in environ.items()})
    cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=":0",
                           env=environ)
    return Client(cluster)


def disconnect(client) -> None:
    """Close the client, and the local cluster if ``connect`` started one."""
    cluster = getattr(client, "cluster", None)
    client.close()
    if cluster is not None:
        cluster.close()


def fit_on_dask(path: Path, columns: Columns, settings, thresholds, out: Path, *, plan_file: Path | None = None,
                plan_price: float | None = None, sep: str | None = None, client=None, partitions: int | None = None,
                progress=None, strict: bool = False, ledger=None) -> dict:
    """Fit ``path`` on the cluster behind ``client`` into the results folder ``out`` (part files, summary and,
    when rows were rejected, ``rejects.csv``).

    Returns the summary (also written as ``out/_summary.json``), which holds the rejected rows' lines
    and reasons.  ``partitions``: output partitions (default: 4 per worker, at least 1).  ``strict``:
    any rejected row fails the run, before anything is written.  The caller checks ``out`` first
    (``outputs.check_outputs``): it is replaced whole.  ``ledger``: an open ``fitcore.ledger.Ledger``
    to backtest signed curves against (``fit --ledger``).
    """
    from ..outputs import staging_folder, temp_path
    started = time.perf_counter()
    pieces = pieces_of(path, columns)
    n_workers = max(len(client.scheduler_info()["workers"]), 1)
    n_parts = partitions or 4 * n_workers
    # Everything is written to a fresh folder beside ``out`` and swapped in at the end, so a failed run
    # leaves an earlier run's folder whole (a killed run's staging folder is removed by the next run).
    staging = staging_folder(out)
    try:
        total = _fit_into(staging, pieces, path, columns, settings, thresholds, plan_file, plan_price, sep, client,
                          n_workers, n_parts, started, progress, strict, ledger)
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    retired = temp_path(out)
    if out.exists():
        out.rename(retired)
    staging.rename(out)
    shutil.rmtree(retired, ignore_errors=True)
    return total


def _fit_into(out: Path, pieces, path, columns, settings, thresholds, plan_file, plan_price, sep, client,
              n_workers: int, n_parts: int, started: float, progress, strict: bool, book=None) -> dict:
    from distributed import wait

    read = [client.submit(read_piece, piece, columns, n_parts, sep, pure=False) for piece in pieces]
    gathered = [client.submit(gather_part, [client.submit(_table_of, f, p) for f in read], columns, pure=False)
                for p in range(n_parts)]
    wait(gathered)
    # Rows read and rows set aside are known before any part is written, so every part's header is final.
    found = client.gather([client.submit(_rejects_of, f) for f in read])
    repeats = client.gather([client.submit(_repeats_of, f) for f in gathered])
    lines = [x for piece in found for x in piece[0]] + [x for part in repeats for x in part[0]]
    reasons = [x for piece in found for x in piece[1]] + [x for part in repeats for x in part[1]]
    source = {"path": str(path.resolve()), "sha256": file_sha256(path), "rows": sum(piece[2] for piece in found),
              "rejected": len(lines)}
    order = np.argsort(lines, kind="stable")
    lines, reasons = [int(lines[i]) for i in order], [reasons[i] for i in order]
    if source["rows"] == source["rejected"] or strict and lines:
        from ..data.loader import first_rejected, no_usable_rows, place
        from ..data.validation import summary
        rejects = _rejects(path, columns, sep, lines, reasons)
        if source["rows"] == source["rejected"]:
            raise no_usable_rows(rejects, columns)
        column, said = first_rejected(rejects, columns)
        raise DataError(f"{said} ({summary(reasons)}; --strict, so nothing was written)", path=str(path),
                        column=column, **place(rejects.kind, lines[0]))
    source.update(rejects_file=None, rejects_sha256=None)
    if lines:
        source.update(rejects_file=REJECTS, rejects_sha256=_write_rejects(out / REJECTS, path, columns, sep,
                                                                          lines, reasons))
    del read
    # A 0/1 control is one holding only 0 and 1 in the whole input: every partition's rows, once repeats are out.
    binary = client.gather([client.submit(_binary_of, f, columns.controls) for f in gathered])
    binary = {name: all(part[name] for part in binary) for name in columns.controls}
    standing, ledger_source = [None] * n_parts, None
    if book is not None:
        from ..ledger.standing import by_partition, standing_of
        standing = by_partition(standing_of(book.histories), columns.keys, n_parts)
        ledger_source = {"path": str(book.path.resolve()), "head": book.head_text, "state": book.state}
    job = PartJob(columns, settings, thresholds, str(plan_file) if plan_file else None, plan_price, source,
                  str(out), sep, binary, ledger_source)
    parts = [client.submit(fit_part, p, client.submit(_table_only, f), job, standing[p], pure=False)
             for p, f in enumerate(gathered)]
    summaries = []
    for future in parts:
        summaries.append(future.result())
        if progress is not None:
            progress(len(summaries), n_parts)
    total = {"schema": "pricefold-run/1", "engine": "dask", "workers": n_workers, "partitions": n_parts,
             "pieces": len(pieces), "input": source,
             "series": sum(s["series"] for s in summaries), "rows": sum(s["rows"] for s in summaries),
             "none": sum(s["none"] for s in summaries), "clean": sum(s["clean"] for s in summaries),
             "chosen": _add(s["chosen"] for s in summaries), "flags": _add(s["flags"] for s in summaries),
             "plan_matched": sum(s["plan_matched"] for s in summaries),
             "backtest": _add(s["backtest"] for s in summaries), "shifted": sum(s["shifted"] for s in summaries),
             "seconds": round(time.perf_counter() - started, 3),
             "rejected": {"lines": lines, "reasons": reasons}}
    (out / SUMMARY).write_text(json.dumps(total, ensure_ascii=False, indent=1))
    return total


def _write_rejects(target: Path, path: Path, columns: Columns, sep: str | None, lines: list, reasons: list) -> str:
    """The rejected rows beside the parts (the same file the local engine writes); its SHA-256."""
    from ..data.rejects import write_rejects
    from ..outputs import atomic_write
    rejects = _rejects(path, columns, sep, lines, reasons)
    return atomic_write(target, lambda handle: write_rejects(rejects, handle))


def _rejects(path: Path, columns: Columns, sep: str | None, lines: list, reasons: list):
    from ..data.loader import delimiter_of, file_kind
    from ..data.rejects import Rejects
    kind = file_kind(path)[0]
    return Rejects(path, kind, delimiter_of(path, columns, sep) if kind == "csv" else None,
                   np.asarray(lines, dtype=np.int64), reasons)


def _table_of(piece_result, p: int):
    return piece_result[0][p]


def _rejects_of(piece_result):
    return piece_result[1].tolist(), piece_result[2], piece_result[3]


def _binary_of(part_result, controls) -> dict:
    table = part_result[0]
    return {name: bool(np.all(np.isin(table.column(CONTROL + name).to_numpy(zero_copy_only=False), (0.0, 1.0))))
            for name in controls}


def _repeats_of(part_result):
    return part_result[1], part_result[2]


def _table_only(part_result):
    return part_result[0]


def _add(dicts) -> dict[str, int]:
    out: dict[str, int] = {}
    for d in dicts:
        for k, v in d.items():
            out[k] = out.get(k, 0) + v
    return out
