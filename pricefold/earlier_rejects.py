"""Whose rejects file is it?  A run replaces or removes ``NAME.rejects.csv`` only when it is the one the results it
replaces at ``-o`` record (``input.rejects_sha256``): a header ending ``line,reason`` proved nothing — a clean run
deleted a hand-made list of that shape, and ``fit.parquet`` deleted or overwrote the rejects file of ``fit.json``
beside it (both name ``fit.rejects.csv``)."""
from __future__ import annotations

import json
import os
import stat
from dataclasses import dataclass
from pathlib import Path

EMPTY = "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"  # the SHA-256 of no bytes
HEAD = 1 << 20  # a JSON results file's header (settings, input) comes before its series: within this, in practice


@dataclass(frozen=True)
class EarlierRejects:
    """What stands at a run's rejects path before it writes: ``exists`` (anything, a link too) and ``owned`` (an
    empty file, or the very file the results at ``-o`` record as theirs, ``sha256`` its digest), with ``why`` a
    clause for a refusal or a note where it exists and is not owned."""

    path: Path
    exists: bool
    owned: bool
    why: str = ""
    sha256: str | None = None


def earlier_rejects(target: Path, results: Path) -> EarlierRejects:
    """The file at ``target`` (the rejects path of ``results``), judged against the results it sits beside."""
    try:
        info = os.lstat(target)
    except OSError:
        return EarlierRejects(target, False, False)
    if not stat.S_ISREG(info.st_mode):
        return EarlierRejects(target, True, False, "it is not a plain file")
    if info.st_size == 0:
        return EarlierRejects(target, True, True, sha256=EMPTY)
    recorded = recorded_rejects(results)
    if recorded is None:
        return EarlierRejects(target, True, False, f"no pricefold results at {results} record it as their rejects")
    from fitcore.data.columns import file_sha256
    try:
        same = file_sha256(target) == recorded
    except OSError as exc:
        return EarlierRejects(target, True, False, f"it cannot be read ({exc.strerror})")
    return EarlierRejects(target, True, same, "" if same else
                          f"it is not the rejects file {results} records (changed since, or another run's)",
                          recorded if same else None)


def recorded_rejects(results: Path) -> str | None:
    """The ``rejects_sha256`` the pricefold results file at ``results`` records (None: no results there, none
    recorded, or not readable as ours)."""
    from fitcore.outputs import is_own
    if not is_own(results, "results"):
        return None
    try:
        if results.suffix.lower() == ".json":
            header = _json_header(results)
        else:
            from fitcore.results.read import read_header
            header = read_header(results)
    except Exception:  # not readable as results: then nothing is recorded
        return None
    digest = (header or {}).get("input", {}).get("rejects_sha256")
    return digest if isinstance(digest, str) else None


def _json_header(path: Path) -> dict | None:
    """A JSON results file's members before ``series``, read from its first MiB."""
    with open(path, "rb") as handle:
        head = handle.read(HEAD)
    cut = head.find(b',"series":')
    return json.loads(head[:cut] + b"}") if cut > 0 else None
