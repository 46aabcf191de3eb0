"""The plan per series, read from a file of key columns + ``plan_price`` (and, with controls, a column
per control and ``plan_date`` for the season terms, each optional)."""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .dataset import Dataset
from .loader import Columns, column_names, read_rows
from .plan_checks import checked_rows, repeated_series, unknown_key

PLAN_DATE = "plan_date"


@dataclass(frozen=True, eq=False)
class Plan:
    """Per series (S,): ``price`` (NaN where the file names none); ``controls``: column → plan values (NaN
    where the file gives none: the default applies); ``date``: the plan dates (NaT: none) or None."""

    price: np.ndarray
    controls: dict
    date: np.ndarray | None


def plan_prices(data: Dataset, path: str | Path, sep: str | None = None, *, partial: bool = False) -> np.ndarray:
    """(S,) the plan price of each series, NaN where the file names none (``read_plan``)."""
    return read_plan(data, path, sep, partial=partial).price


def read_plan(data: Dataset, path: str | Path, sep: str | None = None, *, partial: bool = False,
              controls: tuple[str, ...] = (), season: bool = False) -> Plan:
    """The plan of each series of ``data``.

    Every row must name a series of ``data`` with a price above zero, once (``plan_checks``: what is
    refused, and that empty lines are passed over).  ``controls``: the control
    columns the file may carry (a number each; an empty cell leaves the default); ``season``: whether it
    may carry ``plan_date`` (an ISO date; empty leaves the default).
    ``partial``: ``data`` holds only some of the series (one partition), so rows naming
    other series are passed over rather than refused.
    """
    import pandas as pd  # imported here, not with the module: a fit reads its file while pandas loads
    path = Path(path)
    keys = list(data.key_names)
    present = set(column_names(path, sep, [*keys, "plan_price"])) if controls or season else set()
    given = tuple(name for name in controls if name in present)
    dated = season and PLAN_DATE in present
    columns = Columns(product=keys[0], segments=tuple(keys[1:]), price="plan_price", volume="plan_price",
                      date=PLAN_DATE if dated else None, controls=given)
    rows, kind, delimiter = read_rows(path, columns, sep, rows_are="plan row")
    rows = checked_rows(rows, path, kind, delimiter, controls=given, date=PLAN_DATE if dated else None)
    price = rows.numbers["plan_price"][0]
    table = pd.DataFrame({name: np.asarray(rows.keys[name], dtype=object).astype(str) for name in keys})
    dup = table.duplicated().to_numpy()
    if dup.any():
        first = int(np.argmax(dup))
        earlier = int(np.argmax((table == table.iloc[first]).all(axis=1).to_numpy()))
        raise repeated_series(path, kind, int(rows.line[first]), int(rows.line[earlier]),
                              table.iloc[first].to_dict())
    series = pd.DataFrame({name: data.keys[name].astype(str) for name in keys})
    series["_s"] = np.arange(data.n_series)
    merged = table.merge(series, on=keys, how="left")
    unknown = merged["_s"].isna().to_numpy()
    keep = np.ones(len(unknown), dtype=bool)
    if partial:
        keep = ~unknown
    elif unknown.any():
        first = int(np.argmax(unknown))
        raise unknown_key(path, kind, int(rows.line[first]), {k: merged[k].iloc[first] for k in keys}, data.keys)
    at = merged["_s"].to_numpy()[keep].astype(np.int64)

    def spread(values, empty):
        out = np.full(data.n_series, empty, dtype=np.asarray(values).dtype)
        out[at] = np.asarray(values)[keep]
        return out
    return Plan(spread(price, np.nan), {name: spread(rows.numbers[name][0], np.nan) for name in given},
                spread(rows.date[0], np.datetime64("NaT")) if dated else None)


def unused_columns_note(path: str | Path, keys: tuple[str, ...], controls: tuple[str, ...] = (), season: bool = False,
                        sep: str | None = None) -> str:
    """One line naming the plan file's columns a fit with these ``keys``, ``controls`` and ``season`` does not read,
    and why ("note: plan.csv: plan column not used: 'promo' (no --control given)"), or '' (every column read).
    A control column without ``--control``, ``plan_date`` without ``--season``: otherwise a plan of promotion
    weeks is silently fitted as regular ones."""
    from ..text import clean, quoted
    path = Path(path)
    names = column_names(path, sep, [*keys, "plan_price"])
    read = {*keys, "plan_price", *controls, *([PLAN_DATE] if season else [])}
    why: dict[str, list[str]] = {}
    for name in dict.fromkeys(names):
        if name.strip() and name not in read:
            reason = ("no --season given" if name == PLAN_DATE else "no --control given" if not controls
                      else "not a key, plan_price, plan_date or --control column")
            why.setdefault(reason, []).append(quoted(name))
    if not why:
        return ""
    count = sum(map(len, why.values()))
    parts = "; ".join(f"{', '.join(names)} ({reason})" for reason, names in why.items())
    return f"note: {clean(str(path))}: plan column{'s' * (count > 1)} not used: {parts}"


def plan_keywords(data: Dataset, plan_file: str | Path | None, plan_price: float | None, sep: str | None = None, *,
                  season: int = 0, partial: bool = False) -> dict:
    """``fit_batch``'s plan keywords for ``data``: ``plan_price`` and, from a plan file, the controls' plan
    values (``plan_controls``) and the plan dates for ``season`` terms (``plan_date``)."""
    if plan_file is None:
        return {"plan_price": plan_price}
    plan = read_plan(data, plan_file, sep, partial=partial, controls=tuple(data.controls), season=bool(season))
    return {"plan_price": plan.price, "plan_controls": plan.controls or None, "plan_date": plan.date}
