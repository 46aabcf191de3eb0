"""What a results file must hold, checked as it is read: each problem is one line naming the file, the
series (1-based, in file order) and the field, e.g. ``r.json: series 3: missing 'flags'``.

Only what the readers rely on is checked (names, types, the chosen candidate among the candidates,
every flag's severity); the numbers themselves are taken as written.
"""
from __future__ import annotations

import hashlib
import json
from pathlib import Path

from ..errors import DataError

SEVERITIES = ("stop", "warn")
PARQUET_COLUMNS = ("n", "price_lo", "price_hi", "candidate", "family", "degree", "available", "reason", "cv_mse",
                   "cv_se", "fold_mse", "r2", "q2", "coef", "smearing", "is_chosen", "chosen", "score",
                   "revenue_price", "plan_price", "plan_volume", "plan_lo", "plan_hi", "plan_elasticity", "flags",
                   "fingerprint")


def _fail(path: Path, where: str, problem: str) -> DataError:
    return DataError(f"{where}: {problem}; expected a pricefold results file" if where else
                     f"{problem}; expected a pricefold results file", path=str(path))


def _kind(value) -> str:
    return "null" if value is None else {dict: "an object", list: "a list", str: "text", bool: "true or false",
                                         int: "a number", float: "a number"}.get(type(value), type(value).__name__)


def _number(value) -> bool:
    return value is None or isinstance(value, (int, float)) and not isinstance(value, bool)


def _found(value) -> str:
    """What a wrong value is, saying for a list or an object which part of it is wrong."""
    if isinstance(value, list):
        wrong = next((i for i, x in enumerate(value) if not _number(x)), None)
        return (f"a list whose item {wrong + 1} is {_kind(value[wrong])}" if wrong is not None
                else f"a list of {len(value)}")
    if isinstance(value, dict):
        if not value:
            return "an empty object"
        wrong = next((k for k, x in value.items() if not isinstance(x, str)), None)
        return f"an object whose {wrong!r} is {_kind(value[wrong])}" if wrong is not None else "an object"
    return _kind(value)


def _field(path, where, record: dict, name: str, ok, expected: str, optional: bool = False):
    if name not in record:
        if optional:
            return None
        raise _fail(path, where, f"missing {name!r}")
    value = record[name]
    if not ok(value):
        raise _fail(path, where, f"{name!r} should be {expected}, found {_found(value)}")
    return value


def _check_plan(path, where: str, record: dict) -> None:
    """The plan-price prediction (null without a plan price or a model): what ``show`` and the ledger read."""
    plan = _field(path, where, record, "plan", lambda v: v is None or isinstance(v, dict), "an object or null",
                  optional=True)
    if plan is None:
        return
    place = f"{where}, plan"
    _field(path, place, plan, "price", lambda v: _number(v) and v is not None, "a number")
    for name in ("volume", "lo", "hi", "level", "elasticity"):
        _field(path, place, plan, name, _number, "a number or null")
    _field(path, place, plan, "inside_range", lambda v: isinstance(v, bool), "true or false")


def check_header(path: Path, document: dict, series_key: str | None) -> None:
    """The header's ``settings`` and ``input``, and (JSON) that ``series_key`` holds a list."""
    settings = _field(path, "", document, "settings", lambda v: isinstance(v, dict), "an object")
    _field(path, "settings", settings, "rule", lambda v: isinstance(v, str), "text")
    _field(path, "settings", settings, "level", lambda v: _number(v) and v is not None, "a number")
    from ..fit.settings import OPTIONS
    from ..review.thresholds import recorded_thresholds
    for option in OPTIONS:  # as the options check them (a seed beyond 64 bits, written before that was checked)
        if option.group == "fit" and option.name in settings:
            option.value(settings[option.name], f"{path}: the recorded setting {option.name}")
    recorded_thresholds(settings.get("thresholds"), path)  # JSON cannot carry an infinite one into the ledger
    source = _field(path, "", document, "input", lambda v: isinstance(v, dict), "an object")
    for name in ("path", "sha256"):  # absent when the data came from Python rather than a file
        _field(path, "input", source, name, lambda v: isinstance(v, str), "text", optional=True)
    if series_key is not None:
        _field(path, "", document, series_key, lambda v: isinstance(v, list), "a list of series")


def check_key_columns(path: Path, header: dict, records: list[dict]) -> None:
    """Every series keyed by the same columns: those the header names (product, then segments), or else the
    first series'.  A key without one of them (or with another) was signed as a different series and
    exported a row shifted by a column."""
    columns = (header.get("settings") or {}).get("columns")
    if isinstance(columns, dict) and isinstance(columns.get("product"), str):
        segments = columns.get("segments") or []
        names = [columns["product"], *(segments if isinstance(segments, list) else [])]
    elif records:
        names = list(records[0]["key"])
    else:
        return
    expected = set(names)
    for i, record in enumerate(records):
        key = record["key"]
        if set(key) == expected:
            continue
        missing = [name for name in names if name not in key]
        problem = (f"its key has no {missing[0]!r} column" if missing else
                   f"its key has the extra column {next(k for k in key if k not in expected)!r}")
        shown = ", ".join(f"{k}={v}" for k, v in key.items())
        raise _fail(path, f"series {i + 1} ({shown})", f"{problem} (the series are keyed by {', '.join(names)})")


def check_unique_keys(path: Path, records: list[dict]) -> None:
    """One record a series: two with the same key (a file edited by hand) would show and sign two curves."""
    seen: dict[tuple, int] = {}
    for i, record in enumerate(records):
        key = tuple(sorted(record["key"].items()))
        if key in seen:
            raise _fail(path, f"series {i + 1}", f"has the same key as series {seen[key] + 1} "
                                                  f"({', '.join(f'{k}={v}' for k, v in key)})")
        seen[key] = i


def check_series(path: Path, index: int, record) -> None:
    """One series record as the JSON layout has it (``index``: its place in the file, from 0)."""
    where = f"series {index + 1}"
    if not isinstance(record, dict):
        raise _fail(path, where, f"should be an object, found {_kind(record)}")
    _field(path, where, record, "key", lambda v: isinstance(v, dict) and v and all(
        isinstance(k, str) and isinstance(x, str) for k, x in v.items()), "an object of key columns and their text")
    _field(path, where, record, "n", lambda v: isinstance(v, int) and not isinstance(v, bool) and v >= 0,
           "a whole number")
    _field(path, where, record, "n_weight_0", lambda v: isinstance(v, int) and not isinstance(v, bool) and v >= 0,
           "a whole number", optional=True)
    _field(path, where, record, "price_range", lambda v: isinstance(v, list) and len(v) == 2 and all(map(_number, v)),
           "two numbers")
    candidates = _field(path, where, record, "candidates", lambda v: isinstance(v, list), "a list")
    names = set()
    for c, cand in enumerate(candidates):
        place = f"{where}, candidate {c + 1}"
        if not isinstance(cand, dict):
            raise _fail(path, place, f"should be an object, found {_kind(cand)}")
        names.add(_field(path, place, cand, "name", lambda v: isinstance(v, str), "text"))
        _field(path, place, cand, "available", lambda v: isinstance(v, bool), "true or false")
        for name in ("cv_mse", "cv_se", "r2", "q2", "smearing", "plan_volume", "plan_lo", "plan_hi",
                     "plan_elasticity"):
            _field(path, place, cand, name, _number, "a number or null", optional=True)
        _field(path, place, cand, "coef", lambda v: v is None or isinstance(v, list) and all(map(_number, v)),
               "a list of numbers or null", optional=True)
    chosen = _field(path, where, record, "chosen", lambda v: v is None or isinstance(v, str), "text or null")
    if chosen is not None and chosen not in names:
        raise _fail(path, where, f"'chosen' names {chosen!r}, which is not among its candidates")
    _field(path, where, record, "score", _number, "a number or null")
    flags = _field(path, where, record, "flags", lambda v: isinstance(v, list), "a list of flags")
    for f, flag in enumerate(flags):
        place = f"{where}, flag {f + 1}"
        if not isinstance(flag, dict):
            raise _fail(path, place, f"should be an object, found {_kind(flag)}")
        _field(path, place, flag, "code", lambda v: isinstance(v, str), "text")
        _field(path, place, flag, "severity", lambda v: v in SEVERITIES, " or ".join(map(repr, SEVERITIES)))
        _field(path, place, flag, "message", lambda v: isinstance(v, str), "text")
    _field(path, where, record, "fingerprint", lambda v: isinstance(v, str), "text")
    _check_plan(path, where, record)
    _field(path, where, record, "revenue_price", _number, "a number or null", optional=True)


# The header of a Parquet results file is schema metadata, outside every page's checksum: its SHA-256 beside it.
HEADER, HEADER_SHA256 = b"pricefold", b"pricefold_sha256"


def header_metadata(header: dict) -> dict:
    """The schema metadata holding ``header`` (JSON) and the SHA-256 of that JSON."""
    text = json.dumps(header).encode()
    return {HEADER: text, HEADER_SHA256: hashlib.sha256(text).hexdigest().encode()}


def check_header_digest(path: Path, metadata: dict) -> None:
    """A header whose SHA-256 is beside it (every file since it was) must match it: a flipped bit there changed
    the interval level that ``show`` printed and ``accept-unflagged`` signed.  (An older file has none.)"""
    said = metadata.get(HEADER_SHA256)
    if said is not None and hashlib.sha256(metadata.get(HEADER, b"")).hexdigest().encode() != said:
        raise DataError("its pricefold header does not match the checksum written beside it (a damaged file)",
                        path=str(path))
