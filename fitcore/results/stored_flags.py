"""The flags a stored results file records, as a boolean array of codes per series (each distinct list parsed once)."""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import orjson

from ..arrays import numbers, objects
from ..errors import DataError
from ..review.flags import CODES
from .stored_columns import series_rows


def raised_flags(table, n_s: int, n_c: int, path: Path) -> tuple[np.ndarray, np.ndarray]:
    """(S, flags): the flag codes each series' recorded list names (each distinct list parsed once, the
    sentences not kept: a dict per flagged series would slow every full garbage collection); and (S,) each
    series' text (objects: the distinct texts, shared)."""
    import pyarrow as pa
    texts, index, where = [], [], []  # distinct texts; each series' place among them; the first row holding each
    first_row = 0
    for chunk, rows in series_rows(table.column("flags"), n_c):
        if pa.types.is_dictionary(chunk.type):
            words, at = objects(chunk.dictionary), numbers(chunk.indices)[rows]
            if chunk.null_count:  # a null list: no flags, as an empty text
                words, at = np.append(words, None), np.where(np.isnan(at), len(words), at)
            at = at.astype(np.int64)
        else:
            distinct: dict = {}
            at = np.array([distinct.setdefault(text, len(distinct)) for text in objects(chunk)[rows].tolist()],
                          dtype=np.int64)
            words = list(distinct)
        firsts = np.full(len(words), -1, dtype=np.int64)  # -1: a dictionary entry no series holds
        firsts[at[::-1]] = (first_row + rows)[::-1]
        index.append(at + len(texts))
        texts.extend(words.tolist() if isinstance(words, np.ndarray) else words)
        where.extend(firsts.tolist())
        first_row += len(chunk)
    raised_of = np.zeros((len(texts), len(CODES)), dtype=bool)
    for i, entries in enumerate(_flag_lists(texts, where, path)):
        for entry in entries:
            if entry.get("code") in CODES:
                raised_of[i, CODES.index(entry["code"])] = True
    at = np.concatenate(index) if index else np.zeros(0, dtype=np.int64)
    raised = raised_of[at] if n_s else np.zeros((0, len(CODES)), dtype=bool)
    raised.flags.writeable = False
    return raised, np.array(texts + [None], dtype=object)[:-1][at]


def _flag_lists(texts: list, rows: list[int], path: Path) -> list:
    """Each text parsed as JSON (an empty or null one, or one no series holds: no flags); the first
    unreadable one a ``DataError`` naming its row (``rows``: the file row first holding each text, -1 for
    none).  Text by text: all of them joined into one JSON list would parse faster (0.03 vs 0.07 s at 100,000
    series) but a damaged text with a bracket or comma too many would pass, its flags given to its neighbour."""
    out = []
    for text, row in zip(texts, rows):
        if not text or row < 0:
            out.append([])
            continue
        try:
            out.append(_flags_json(text))
        except json.JSONDecodeError:
            raise DataError(f"row {row + 1}, column 'flags': expected JSON text of a list of flags, found "
                            f"{text[:60]!r}", path=str(path)) from None
    return out


def _flags_json(text: str):
    """One flags text parsed: by orjson (3× faster than ``json``: 0.036 → 0.012 s for the 14,735 distinct texts of
    100,000 series, before the list), and by ``json`` what orjson refuses (NaN, lone surrogates, a number too
    large for a float), which ``json`` then reads or refuses as before.  The two agree on every text orjson
    reads but for integers beyond 64 bits (a float from orjson), and only the flags' codes, text, are kept."""
    try:
        return orjson.loads(text)
    except orjson.JSONDecodeError:
        return json.loads(text)
