"""A Parquet results file (or a folder of parts) opened as ``Results`` and ``Diagnosis`` arrays, without refitting.

Column by column through Arrow into numpy, so opening 100k series costs a
fraction of a second and no Python object per candidate.  The observations
themselves are not in a results file: ``rows_loaded`` is False, the dataset
has each series' count but no rows, and what needs the rows (the points on
a chart, the prediction band) waits for a fit of the data file.
"""
from __future__ import annotations

import json
from dataclasses import dataclass
from functools import cached_property, lru_cache
from pathlib import Path

import numpy as np

from ..arrays import numbers
from ..data.dataset import Dataset
from ..errors import DataError, first_line
from ..fit import reasons
from ..fit.basis import window
from ..fit.families import lineup_for
from ..fit.folds import fold_scheme
from ..fit.results import Results
from ..fit.settings import settings_from_dict
from ..review.flags import CODES, SEVERITY, Diagnosis
from ..review.thresholds import recorded_thresholds
from .control_fields import CONTROL_COLUMNS, cov_known, stored_controls
from .later import LaterColumns, Waiting
from .read import CYCLE_COLUMNS, read_header, result_parts
from .series_columns import check_candidate_rows
from .stored_columns import (CellColumn, StoredCovariances, Unknown, column_values, per_series,
                             per_series_text)
from .stored_flags import raised_flags

# The columns triage reads (besides the key columns); the plain-unit coefficients are not among them.
# ``stored_results(later=True)`` reads only ``LISTED`` (what the list and the evidence's title show) before
# it returns; a thread (``LaterColumns``) then reads ``SOON`` (the evidence's numbers) at once and ``LATER``,
# the largest, which only the charts and a sign-off need (and the covariances), when its caller starts it.
LISTED = ("n", "price_lo", "price_hi", "candidate", "available", "is_chosen", "score", "flags", "fingerprint")
SOON = ("cv_mse", "cv_se", "r2", "q2", "smearing", "revenue_price", "plan_price", "plan_volume",
        "plan_lo", "plan_hi", "plan_elasticity")
LATER = ("window_coef", "fold_mse", "reason")
NEEDED = (*LISTED, *SOON, *LATER)
SAID = ("n_weight_0",)  # read where a part holds it (a weighted fit's), else nothing is said of it


@dataclass(frozen=True, eq=False)
class StoredDataset(Dataset):
    """Counts of the series of a results file; keys and fingerprints as Arrow text (no string per series)."""

    stored_fingerprints: object = None  # (S,) Arrow text

    @cached_property
    def fingerprints(self):
        return self.stored_fingerprints

    def fingerprint_of(self, s: int) -> str:
        return self.stored_fingerprints[s].as_py()

    def key_of(self, s: int) -> dict[str, str]:
        return {name: self.keys[name][s].as_py() for name in self.key_names}


@dataclass(frozen=True, eq=False)
class StoredResults(Results):
    """``Results`` read back from a file; reasons are the sentences the file holds (an Arrow column).

    ``fold_err`` is empty: the fold errors stay in the file's lists and ``folds_of`` reads one series'.
    """

    reasons: object = None
    fold_lists: object = None
    stored_score: np.ndarray = None  # (S × C,) Arrow lists: each cell's per-fold errors, read per series on demand
    stored_cov: object = None  # ``StoredCovariances`` where the file holds them (``review.intervals``)
    stored_last_date: np.ndarray = None  # (S,) datetime64[D] where the file holds each series' last date
    stored_weight_0: np.ndarray = None  # (S,) int64 a weighted fit's rows of weight 0 where the file holds them
    stored_backtest: dict = None  # name → (S,) the backtest columns of results from ``fit --ledger`` (else None)
    later: LaterColumns = None  # the columns still being read (``stored_results(later=True)``), else None

    rows_loaded = False

    @property
    def complete(self) -> bool:
        """Every column is read (with ``later``, the ones read behind the list may not be yet)."""
        return self.later is None or self.later.ready

    @property
    def numbers_ready(self) -> bool:
        """Every candidate's numbers are read (with ``later``, the ``SOON`` columns come just after the list's)."""
        return self.later is None or self.later.soon_ready

    @cached_property
    def score(self) -> np.ndarray:
        return self.stored_score

    def folds_of(self, s: int) -> np.ndarray:
        """(K, C) held-out MSE per fold of series ``s`` (NaN where a candidate is unavailable)."""
        n_c = len(self.candidates)
        out = np.full((int(self.fold_start[s + 1] - self.fold_start[s]), n_c), np.nan)
        for c, values in enumerate(self.fold_lists[s * n_c:(s + 1) * n_c].to_pylist()):
            if values:
                out[:len(values), c] = values
        return out

    def reason_text(self, s: int, c: int) -> str | None:
        return self.reasons[s * len(self.candidates) + c].as_py()


@dataclass(frozen=True, eq=False)
class StoredDiagnosis(Diagnosis):
    """Flags as the file recorded them (sentences included); ``stale`` still comes from the ledger."""

    texts: np.ndarray = None  # (S,) str or None: each series' flags as the file holds them (JSON), parsed on demand

    def controls_outside(self, s: int) -> bool:
        """As the file recorded it: ``outside-range`` is the plan price's or a control's, so a control's where the
        plan price lies within the observed prices (the control columns' rows, which would tell, are not in a
        results file: asked of them, every candidate of a series flagged so had said "inside")."""
        results = self.results
        price = float(results.plan_price[s])
        by_price = np.isfinite(price) and not results.price_lo[s] <= price <= results.price_hi[s]
        return bool(self.raised[s, CODES.index("outside-range")]) and not by_price

    def flags_of(self, s: int) -> list[dict]:
        from ..review.sentences import sentence
        recorded = {e["code"]: e["message"] for e in json.loads(self.texts[s] or "[]")}
        return [{"code": code, "severity": SEVERITY[code],
                 "message": sentence(self, s, code) if code == "stale" else recorded.get(code, "")}
                for i, code in enumerate(CODES) if self.raised[s, i]]


def stored_results(path: str | Path, later: bool = False) -> tuple[StoredResults, StoredDiagnosis]:
    """Open a Parquet results file; a ``DataError`` if it lacks what triage needs (written by an older pricefold).

    ``later``: read only the ``LISTED`` columns now, the ``SOON`` ones in a thread at once, and leave the
    ``LATER`` columns and the covariances to that thread once started (``StoredResults.later``: started by the
    caller, or by the first use of one of them, which waits for it), so what a list needs is back sooner.
    What is made of a column still being read (``Later``, ``Waiting``) waits for it where first used."""
    path = Path(path)
    meta = read_header(path)
    settings = settings_from_dict(meta["settings"])
    wanted = [*meta["key_columns"], *NEEDED, *(CONTROL_COLUMNS if meta["settings"].get("controls") else ())]
    parts = result_parts(path) or [path]
    # Every part opened once and read through that handle, by the thread behind the list too: a results file
    # replaced meanwhile (another fit writing the same name) cannot mix its columns with the ones on screen.
    files = [_open(part) for part in parts]
    try:
        opened = _stored(path, meta, settings, wanted, parts, files, later)
    except BaseException:
        later = False
        raise
    finally:
        if not later:  # else the thread reading the rest closes them
            for handle in files:
                handle.close()
    return opened


def _read(reader, part: Path, columns: list[str]):
    """``columns`` of one part; a damaged page (its checksum) or a truncated file is one line naming the part."""
    import pyarrow as pa
    try:
        return reader.read(columns=columns)
    except (OSError, pa.ArrowException) as exc:
        raise DataError(f"cannot read it ({first_line(exc)})", path=str(part)) from None


def _open(part: Path):
    try:
        return open(part, "rb")
    except OSError as exc:
        raise DataError(f"cannot read it ({exc.strerror or first_line(exc)})", path=str(part)) from None


def _stored(path: Path, meta: dict, settings, wanted: list[str], parts: list, files: list, later: bool):
    import pyarrow as pa
    import pyarrow.parquet as pq
    tables, readers = [], []
    for part, handle in zip(parts, files):
        # not read_table: that imports pyarrow.dataset and pandas (0.3 s); every page's checksum checked
        reader = pq.ParquetFile(handle, page_checksum_verification=True)
        readers.append(reader)
        names = set(reader.schema_arrow.names)  # the property converts the schema on each call (≈ 0.5 ms)
        missing = [name for name in wanted if name not in names]
        if missing:
            raise DataError(f"written by an older pricefold (no {', '.join(missing)} column)", path=str(part))
        said = [name for name in SAID if name in names]  # written only by fits that have them
        tables.append(_read(reader, part, [n for n in wanted if not (later and n in (*SOON, *LATER))] + said))
    table = pa.concat_tables(tables, promote_options="permissive") if len(tables) > 1 else tables[0]
    cycle = _has_cycle(readers)
    read_now = _optional(readers, parts, CYCLE_LATER if later else ()) if cycle else None
    # started only now: its thread reads through the same handles, which nothing else reads from here on
    late = LaterColumns(files, [*LATER, *(CYCLE_LATER if cycle else ())], str(parts[0]), SOON) if later else None

    def column(name):  # the column, or one still being read
        return late.column(name) if late is not None and name in (*late.soon, *late.names) else table.column(name)
    lineup = lineup_for(settings)
    cands = lineup.candidates
    n_c = len(cands)
    n_s = check_candidate_rows(path, table.column("candidate"), [c.name for c in cands]) if n_c else 0

    def cells(name):
        return CellColumn(column(name), n_s, n_c)

    def series_values(name):  # one value a series: that of its first row (every candidate's row holds it)
        return np.ascontiguousarray(column_values(column(name))[::max(n_c, 1)])

    def series_texts(name):  # Arrow text, decoded from its dictionary
        return per_series_text(table.column(name), n_c)

    def soon(make):  # made now, or where first used once its columns are read
        return Waiting(make) if late is not None else make()

    key_names = tuple(meta["key_columns"])
    counts = series_values("n").astype(np.int64)
    data = StoredDataset(key_names, {k: series_texts(k) for k in key_names},
                         np.concatenate(([0], np.cumsum(counts))).astype(np.int64), np.zeros(0), np.zeros(0),
                         source=dict(meta.get("input", {})), stored_fingerprints=series_texts("fingerprint"))
    lo, hi = series_values("price_lo").astype(float, copy=False), series_values("price_hi").astype(float, copy=False)
    mid, half = window(lo, hi)
    available = column_values(table.column("available")).astype(bool).reshape(n_s, n_c)

    @lru_cache(maxsize=None)
    def windows():  # each candidate's window (mid, half), where it was fitted
        basis_mid, basis_half = np.zeros((n_s, n_c)), np.zeros((n_s, n_c))
        for family, cols in lineup.groups:
            for c in range(cols.start, cols.stop):
                basis_mid[:, c], basis_half[:, c] = family.window_of(lo, hi, available[:, c])
        return basis_mid, basis_half
    is_chosen = column_values(table.column("is_chosen")).astype(bool).reshape(n_s, n_c)
    chosen = np.where(is_chosen.any(axis=1), is_chosen.argmax(axis=1), -1)
    n_folds = fold_scheme(settings).error_counts(counts)
    fold_start = np.concatenate(([0], np.cumsum(n_folds))).astype(np.int64)
    smeared = np.array([lineup.family_of(c).smeared for c in range(n_c)], dtype=bool)

    def smear():
        values = column_values(column("smearing")).astype(float, copy=False).reshape(n_s, n_c)
        return np.where(smeared, np.where(np.isfinite(values), values, 1.0), np.nan)
    unknown = Unknown((n_s, n_c))  # residual variance and degrees of freedom need the rows
    results = StoredResults(
        data=data, settings=settings, candidates=cands,
        available=available,
        reason=soon(lambda: np.where(available, reasons.NONE, reasons.RANK_ALL).astype(np.int8)),
        cv_mse=cells("cv_mse"), cv_se=cells("cv_se"), r2=cells("r2"), q2=cells("q2"),
        fold_err=np.zeros((0, n_c)), fold_start=fold_start, price_lo=lo, price_hi=hi, mid=mid, half=half,
        basis_mid=soon(lambda: windows()[0]), basis_half=soon(lambda: windows()[1]), smear=soon(smear),
        sigma2=unknown, df=unknown, coef=CellColumn(column("window_coef"), n_s, n_c, lineup.width),
        chosen=chosen, plan_price=soon(lambda: series_values("plan_price").astype(float)),
        plan_volume=cells("plan_volume"), plan_lo=cells("plan_lo"), plan_hi=cells("plan_hi"),
        plan_elasticity=cells("plan_elasticity"),
        revenue_price=soon(lambda: series_values("revenue_price").astype(float)),
        top_cook=np.full(n_s, -1.0), top_row=np.full(n_s, -1, np.int64), reasons=column("reason"),
        fold_lists=column("fold_mse"), stored_score=series_values("score").astype(float, copy=False),
        controls=stored_controls(table, meta["settings"], n_s, n_c, numbers), later=late,
        stored_weight_0=np.nan_to_num(series_values("n_weight_0").astype(float)).astype(np.int64)
        if "n_weight_0" in table.column_names else None)
    if cycle:
        results = _with_cycle_fields(results, read_now, n_s, n_c, lineup.width, column if late is not None else None,
                                     cov_known(meta["settings"]))
    thresholds = recorded_thresholds(settings.extra.get("thresholds"), path)
    raised, flag_texts = raised_flags(table, n_s, n_c, path)
    return results, StoredDiagnosis(results, thresholds, raised, {}, flag_texts)


# -- the next cycle's fields (``results/cycle.py``): read where the file holds them --------------------

CYCLE = CYCLE_COLUMNS  # the next cycle's fields, all or none (``read.read_header`` checks)
CYCLE_LATER = ("sigma2", "df", "cov_unscaled")  # only a decision's snapshot needs them: read behind the list


def _has_cycle(readers) -> bool:
    """Whether every part (its ``pq.ParquetFile``) holds the cycle columns (an older file holds none)."""
    return all(set(CYCLE) <= set(reader.schema_arrow.names) for reader in readers)


def _optional(readers, parts, leave_out=()):
    """The cycle columns of every part (its ``pq.ParquetFile``; but ``leave_out``), with the backtest columns
    where written."""
    import pyarrow as pa
    tables = []
    for reader, part in zip(readers, parts):
        names = reader.schema_arrow.names
        tables.append(_read(reader, part, [n for n in CYCLE if n not in leave_out]
                            + [n for n in names if n.startswith("backtest_")]))
    return pa.concat_tables(tables) if len(tables) > 1 else tables[0]


def _with_cycle_fields(results: StoredResults, table, n_s: int, n_c: int, width: int, column=None,
                       cov_ok: bool = True) -> StoredResults:
    """The cycle fields from ``table``; ``column(name)``, when given, for the ones read later; the covariances
    none where not ``cov_ok`` (``control_fields.cov_known``)."""
    from dataclasses import replace

    import pyarrow as pa
    column = column or table.column
    days = table.column("last_date").combine_chunks()  # date32: days since 1970 as int32
    last = numbers(days.view(pa.int32()))[::max(n_c, 1)] if n_s else np.zeros(0)
    last_date = None if n_s and np.isnan(last).all() else np.where(np.isnan(last), np.iinfo(np.int64).min,
                                                                       last).astype(np.int64).view("datetime64[D]")
    backtest = None
    if "backtest_status" in table.column_names:
        backtest = {name[len("backtest_"):]: per_series(table.column(name), n_c)
                    for name in table.column_names if name.startswith("backtest_")}
    return replace(results, sigma2=CellColumn(column("sigma2"), n_s, n_c), stored_backtest=backtest,
                   df=CellColumn(column("df"), n_s, n_c),
                   stored_cov=StoredCovariances(column("cov_unscaled"), n_c, [c.complexity for c in results.candidates],
                                                width) if cov_ok else None,
                   stored_last_date=last_date)

