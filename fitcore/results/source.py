"""What a results file was fitted from, and fitting it again: the data, columns, settings, plan and
thresholds its header names (``Source``), and the ledger that goes with a results or data file by default.

Pure file reading and the engine, no user interface: the triage screen and the report both start here.
"""
from __future__ import annotations

from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Callable

from ..data.columns import Columns, file_sha256, is_parquet_name
from ..errors import DataError
from ..fit.settings import FitSettings, provenance, settings_from_dict
from ..review.thresholds import Thresholds
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


def source_from_results(path: Path, check_data: bool = True) -> Source:
    """The source a results file was fitted from (its settings name the data, columns and plan).

    ``check_data``: compare the data file with the digest the results recorded now (a warning when it
    changed); otherwise leave that to ``refit_stored``.
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
    data = Path(recorded["path"])
    if not data.exists():
        raise DataError(f"the data it was fitted from is not at {data}", path=str(path))
    plan = extra.get("plan") or {}
    source = Source(data=data, columns=Columns.from_dict(extra["columns"]),
                    settings=replace(settings, extra={}),
                    plan_file=Path(plan["file"]) if plan.get("file") else None, plan_price=plan.get("price"),
                    thresholds=Thresholds(**extra.get("thresholds", {})))
    if not check_data:
        source.expected_sha256 = head["input"]["sha256"]
    elif file_sha256(data) != head["input"]["sha256"]:
        source.warnings.append(f"{data} changed since {path.name} was written: showing a fresh fit of the data "
                               "as it is now (decisions made on the old data show as stale)")
    return source


def fit_source(source: Source, progress: Callable[[int, int], None] | None = None):
    """``(results, diagnosis)`` of the source, its settings recording how to fit it again."""
    from ..fit.engine import fit_batch
    from ..data.loader import load
    from ..data.plan import plan_keywords
    from ..review.flags import diagnose
    data = load(source.data, source.columns, sep=source.sep)
    plan = plan_keywords(data, source.plan_file, source.plan_price, season=source.settings.season)
    extra = provenance(source.columns.as_dict(), str(source.plan_file) if source.plan_file else None,
                       source.plan_price)
    results = fit_batch(data, replace(source.settings, extra=extra), **plan, progress=progress)
    return results, diagnose(results, source.thresholds)


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


def refit_stored(source: Source, progress: Callable[[int, int], None] | None = None):
    """The fit that brings observations to a stored session: only if the data are what the results were fitted on."""
    if source.expected_sha256 and file_sha256(source.data) != source.expected_sha256:
        raise DataError("changed since the results were written: showing the results without observations; "
                        "run 'pricefold triage' on the data file for a fresh fit", path=str(source.data))
    return fit_source(source, progress)


def default_ledger(results_or_data: Path) -> Path:
    """``<name>.ledger.jsonl`` beside the file: its last extension (and a ``.gz`` before it) replaced, so
    ``fit.v1.json`` → ``fit.v1.ledger.jsonl`` and ``week.12.csv.gz`` → ``week.12.ledger.jsonl``."""
    name = results_or_data.name
    if name.lower().endswith(".gz"):
        name = name[:-3]
    stem, dot, extension = name.rpartition(".")
    return results_or_data.with_name((stem if dot and stem else name) + ".ledger.jsonl")
