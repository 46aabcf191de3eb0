"""Building a triage session from files: a data file, or a results file and the data it names.

Used by the command line and by the tests alike, so both drive the same app.
"""
from __future__ import annotations

from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Callable

from fitcore import fit_batch
from fitcore.diagnostics import diagnose
from fitcore.errors import DataError
from fitcore.ledger import Identity, results_digest
from fitcore.loader import Columns, file_sha256, load
from fitcore.plan import plan_prices
from fitcore.results_io import header
from fitcore.results_read import read_results
from fitcore.settings import FitSettings, provenance, settings_from_dict
from fitcore.thresholds import Thresholds

from .session import TriageSession

SAMPLE = Path(__file__).resolve().parents[1] / "sample"


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


def source_from_results(path: Path) -> Source:
    """The source a results file was fitted from (its settings name the data, columns and plan)."""
    head, _ = read_results(path)
    settings = settings_from_dict(head["settings"])
    extra = settings.extra
    if not extra.get("columns"):
        raise DataError("this results file does not say which columns it was fitted from; "
                        "run 'pricefold triage' on the data file instead", path=str(path))
    data = Path(head["input"]["path"])
    if not data.exists():
        raise DataError(f"the data it was fitted from is not at {data}", path=str(path))
    plan = extra.get("plan") or {}
    source = Source(data=data, columns=Columns.from_dict(extra["columns"]),
                    settings=replace(settings, extra={}),
                    plan_file=Path(plan["file"]) if plan.get("file") else None, plan_price=plan.get("price"),
                    thresholds=Thresholds(**extra.get("thresholds", {})))
    if file_sha256(data) != head["input"]["sha256"]:
        source.warnings.append(f"{data} changed since {path.name} was written: showing a fresh fit of the data "
                               "as it is now (decisions made on the old data show as stale)")
    return source


def fit_source(source: Source, progress: Callable[[int, int], None] | None = None):
    """``(results, diagnosis)`` of the source, its settings recording how to fit it again."""
    data = load(source.data, source.columns)
    plan = plan_prices(data, source.plan_file) if source.plan_file else source.plan_price
    extra = provenance(source.columns.as_dict(), str(source.plan_file) if source.plan_file else None,
                       source.plan_price)
    results = fit_batch(data, replace(source.settings, extra=extra), plan_price=plan, progress=progress)
    return results, diagnose(results, source.thresholds)


def open_session(source: Source, ledger_path: Path, who: Identity, key: bytes | None = None,
                 progress: Callable[[int, int], None] | None = None) -> TriageSession:
    results, diagnosis = fit_source(source, progress)
    session = TriageSession(results, diagnosis, ledger_path, who, results_digest(header(results, diagnosis)), key)
    session.warnings.extend(source.warnings)
    return session


def sample_source() -> Source:
    if not (SAMPLE / "wholesale.csv").exists():
        raise DataError("the bundled sample is not here; run pricefold from a source checkout", path=str(SAMPLE))
    return Source(data=SAMPLE / "wholesale.csv", columns=Columns(segments=("region",), date="week"),
                  plan_file=SAMPLE / "plan.csv")


def default_ledger(results_or_data: Path) -> Path:
    return results_or_data.with_name(results_or_data.name.split(".")[0] + ".ledger.jsonl")
