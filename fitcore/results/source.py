"""What a results file was fitted from, and fitting it again: the data, columns, settings, plan and
thresholds its header names (``Source``), and the ledger that goes with a results or data file by default.

Pure file reading and the engine, no user interface: the triage screen and the report both start here.
"""
from __future__ import annotations

from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Callable

import numpy as np

from ..data.columns import Columns, file_sha256, is_parquet_name
from ..errors import DataError
from ..fit.settings import FitSettings, provenance, settings_from_dict
from ..review.thresholds import Thresholds, recorded_thresholds
from .read import read_header, read_results


@dataclass
class Source:
    """What to fit: the data, its columns, the fit settings, the plan and the thresholds."""

    data: Path
    columns: Columns = Columns()
    settings: FitSettings = FitSettings()
    plan_file: Path | None = None
    plan_price: float | None = None
    thresholds: Thresholds = Thresholds()
    warnings: list[str] = field(default_factory=list)
    expected_sha256: str | None = None  # the data's digest when the results were written, checked before a refit
    units: dict = field(default_factory=dict)  # labels from the settings file's [units] table: price, volume
    sep: str | None = None  # the data's field separator (None: found from the header), as ``fit --sep``
    fitted_ledger: str | None = None  # the ledger results were fitted against (``fit --ledger``), as recorded
    results: Path | None = None  # the results file this source was read from (``source_from_results``), as given

    @property
    def found(self) -> bool:
        """The data file is where the results say (stored results open without it: no observations, no refit)."""
        return self.data.exists()


def source_from_results(path: Path, check_data: bool = True) -> Source:
    """The source a results file was fitted from (its settings name the data, columns and plan).

    ``check_data``: compare the data file with the digest the results recorded now (a warning when it
    changed; ``DataError`` when it is not there); otherwise leave both to ``refit_stored`` — stored results
    open without their data (``Source.found`` says whether the data file is there).
    """
    head = read_header(path) if is_stored(path) else read_results(path)[0]
    settings = settings_from_dict(head["settings"])
    extra = settings.extra
    if not extra.get("columns"):
        raise DataError("this results file does not say which columns it was fitted from; "
                        "run 'pricefold triage' on the data file instead", path=str(path))
    recorded = head.get("input") or {}
    for name, what in (("path", "the data file it was fitted from"), ("sha256", "that data file's digest")):
        if not isinstance(recorded.get(name), str):  # results of a fit made from Python, not from a file
            raise DataError(f"expected 'input' → '{name}' ({what}), found none; run 'pricefold triage' on the "
                            "data file instead", path=str(path))
    data = _beside(path, recorded["path"])
    if check_data and not data.exists():
        raise DataError(f"the data it was fitted from is not at {data}", path=str(path))
    plan = extra.get("plan") or {}
    source = Source(data=data, columns=Columns.from_dict(extra["columns"]),
                    settings=replace(settings, extra={}),
                    plan_file=_beside(path, plan["file"]) if plan.get("file") else None, plan_price=plan.get("price"),
                    thresholds=recorded_thresholds(extra.get("thresholds"), path),
                    fitted_ledger=(head.get("ledger") or {}).get("path"), results=Path(path))
    if not check_data:
        source.expected_sha256 = head["input"]["sha256"]
    elif file_sha256(data) != head["input"]["sha256"]:
        source.warnings.append(f"{data} changed since {path.name} was written: showing a fresh fit of the data "
                               "as it is now (decisions made on the old data show as stale)")
    return source


def _beside(results: Path, recorded: str) -> Path:
    """A file a results file names: as recorded when absolute (``fit`` records absolute paths); a relative
    name (the sample's shipped results) is read beside the results file, wherever the command runs."""
    named = Path(recorded)
    return named if named.is_absolute() else Path(results).parent / named


def fit_source(source: Source, progress: Callable[[int, int], None] | None = None):
    """``(results, diagnosis)`` of the source, its settings recording how to fit it again."""
    return read_source(source).fit(progress)


@dataclass(frozen=True)
class Reading:
    """A source's data and plan, read once: fitted whole, or a few series first (``fit_batch`` on a subset:
    each series' fit depends on its own rows only, so a subset's numbers are the whole fit's)."""

    data: object  # ``Dataset``
    settings: FitSettings  # with the provenance the results record
    plan: dict  # ``fit_batch``'s plan keywords for every series of ``data``
    thresholds: Thresholds
    rejects: object = None  # ``Rejects``: the data's rows not fitted, with their lines and reasons

    def fit(self, progress: Callable[[int, int], None] | None = None, series=None):
        """``(results, diagnosis)`` of every series, or of ``series`` (indices into ``data``, ascending)."""
        from ..fit.engine import fit_batch
        from ..review.flags import diagnose
        data, plan = self.data, self.plan
        if series is not None:
            series = np.asarray(series, dtype=np.int64)
            data, plan = subset(data, series), {name: _series_part(value, series, self.data.n_series)
                                                 for name, value in plan.items()}
        results = fit_batch(data, self.settings, **plan, progress=progress)
        return results, diagnose(results, self.thresholds)


def read_source(source: Source) -> Reading:
    """Read the source's data and plan (``DataError`` for bad input, as ``pricefold fit`` says it)."""
    from ..data.loader import load_with_rejects
    from ..data.plan import plan_keywords
    data, rejects = load_with_rejects(source.data, source.columns, sep=source.sep)
    plan = plan_keywords(data, source.plan_file, source.plan_price, season=source.settings.season)
    extra = provenance(source.columns.as_dict(), str(source.plan_file) if source.plan_file else None,
                       source.plan_price)
    return Reading(data, replace(source.settings, extra=extra), plan, source.thresholds, rejects)


def subset(data, series: np.ndarray):
    """The ``Dataset`` of ``series`` only (ascending indices), rows in their order; whether each control is 0/1
    stays what the whole input says (a partition is told so too)."""
    from ..data.dataset import Dataset
    from ..review.intervals import rows_of
    counts = data.offsets[series + 1] - data.offsets[series]
    rows = rows_of(data.offsets, series)

    def part(values):
        return None if values is None else np.ascontiguousarray(np.asarray(values)[rows])
    return Dataset(tuple(data.key_names), {name: data.keys[name].take(series) for name in data.key_names},
                   np.concatenate(([0], np.cumsum(counts))).astype(np.int64), part(data.price), part(data.volume),
                   part(data.weight), part(data.date), part(data.line), dict(data.source),
                   {name: part(values) for name, values in data.controls.items()}, dict(data.control_binary))


def _series_part(value, series: np.ndarray, n_series: int):
    """A plan keyword's values for ``series``: per-series arrays (and dicts of them) taken, scalars kept."""
    if isinstance(value, dict):
        return {name: _series_part(v, series, n_series) for name, v in value.items()}
    if isinstance(value, np.ndarray) and value.ndim and len(value) == n_series:
        return value[series]
    return value


def is_stored(path: Path) -> bool:
    """A Parquet results file that triage can open without refitting (it has the window coefficients)."""
    import pyarrow.parquet as pq

    from .read import result_parts
    try:
        parts = result_parts(path)
        if parts is None and not is_parquet_name(path):
            return False
        return "window_coef" in pq.read_schema((parts or [path])[0]).names
    except Exception:  # not readable: the refit path reports it
        return False


def refit_stored(source: Source, progress: Callable[[int, int], None] | None = None,
                 first: Callable[[Reading], None] | None = None):
    """The fit that brings observations to a stored session: only if the data are what the results were fitted on.

    ``first(reading)``, when given, is called once the data are read and before the whole fit (a screen
    fits the series it shows first: ``reading.fit(series=…)``)."""
    if not source.found:
        raise DataError("not found: showing the stored results without observations", path=str(source.data))
    reading = read_source(source)  # the loader hashes the file while it reads it: no second pass over it
    if source.expected_sha256 and reading.data.source.get("sha256") != source.expected_sha256:
        raise DataError("changed since the results were written: showing the results without observations; "
                        "run 'pricefold triage' on the data file for a fresh fit", path=str(source.data))
    if first is not None:
        first(reading)
    return reading.fit(progress)


def default_ledger(results_or_data: Path) -> Path:
    """``<name>.ledger.jsonl`` beside the file: its last extension (and a ``.gz`` before it) replaced, so
    ``fit.v1.json`` → ``fit.v1.ledger.jsonl`` and ``week.12.csv.gz`` → ``week.12.ledger.jsonl``."""
    name = results_or_data.name
    if name.lower().endswith(".gz"):
        name = name[:-3]
    stem, dot, extension = name.rpartition(".")
    return results_or_data.with_name((stem if dot and stem else name) + ".ledger.jsonl")
