"""The output guard: before a command touches anything, every output is checked against every input.

An output may not be an input (the same path once symlinks are followed and ``..`` resolved, or the
same file under another name), lie inside an input folder, or be a folder holding an input.  Its folder
must exist (nothing is created silently) and be writable.  An existing output must be one pricefold
made, of the same kind, or empty: a run replaces its own earlier output and nothing else.

Kinds of output and how an earlier one is recognised:

    results         JSON starting ``{"schema":"pricefold-results/``, sealed and unchanged (``seal.file_sealed``;
                    where the system keeps no seals, the marker alone), or Parquet with ``pricefold`` metadata
    results-folder  a folder holding ``_summary.json`` (``fit --engine dask``), or an empty folder
    rejects         CSV whose header ends with ``line,reason`` (``fit`` asks more: the very file the results it
                    replaces record, ``pricefold.earlier_rejects``)
    export          CSV whose header holds ``status``, ``model`` and ``coef`` (``ledger export``), sealed and
                    unchanged (``seal.file_sealed``); where the system keeps no seals, every row still shaped as
                    the command writes them (``_export_shaped``)
    report          HTML whose first KiB holds ``<meta name="generator" content="pricefold report``, and whose seal
                    (``seal``: its SHA-256, inside it) still matches: an edited page is not replaced
"""
from __future__ import annotations

import csv
import io
import os
import stat
from pathlib import Path
from typing import Iterable

from ..data.columns import RESULTS_JSON
from ..errors import DataError

KIND_NAMES = {"results": "a pricefold results file", "results-folder": "a pricefold results folder",
              "rejects": "a rejects file pricefold wrote", "export": "a pricefold export unchanged since written",
              "report": "a page written by pricefold report and unchanged since"}
_REPORT = b'<meta name="generator" content="pricefold report'  # pricefold/report/page.py writes it

Inputs = Iterable[tuple[str, "str | Path | None"]]


def check_outputs(outputs: Iterable[tuple["str | Path", str]], inputs: Inputs, *, foreign_later=("rejects",)) -> None:
    """Raise ``DataError`` (one line) unless every ``(path, kind)`` output may be written.

    ``inputs``: ``(role, path)`` pairs such as ``("the data", path)``; None paths are skipped.  Kinds in
    ``foreign_later`` are written only sometimes (a rejects file): what an existing one holds is checked
    when it is written (``is_own``), not here.
    """
    known = [(role, Path(path)) for role, path in inputs if path is not None]
    for path, kind in outputs:
        path = Path(path)
        _check_folder(path)
        check_not_input(path, known, folder=kind == "results-folder")
        if kind not in foreign_later:
            _check_existing(path, kind)


def check_not_input(path: "str | Path", inputs: Inputs, *, folder: bool = False) -> None:
    """Raise ``DataError`` if ``path`` is, contains (``folder``: it will be replaced whole) or lies inside an input."""
    path = Path(path)
    target = _resolved(path)
    for role, source in inputs:
        if source is None:
            continue
        source = Path(source)
        where = _resolved(source)
        if target == where or _same_file(path, source):
            raise DataError(f"this is also an input ({role}, {source}); pricefold never writes over its inputs",
                            path=str(path))
        if where.is_dir() and where in target.parents:
            raise DataError(f"lies inside the input folder {source} ({role}); write it elsewhere", path=str(path))
        if folder and target in where.parents:
            raise DataError(f"{role} {source} lies inside the output folder, which the run replaces whole; "
                            "choose another output folder", path=str(path))


def is_own(path: "str | Path", kind: str) -> bool:
    """Is the existing ``path`` empty, or an output of ``kind`` that pricefold wrote?  (False if it is missing.)"""
    path = Path(path)
    try:
        info = os.stat(path)
    except OSError:
        return False
    if kind == "results-folder":
        return stat.S_ISDIR(info.st_mode) and ((path / "_summary.json").is_file() or not any(path.iterdir()))
    if not stat.S_ISREG(info.st_mode):
        return False
    if info.st_size == 0:
        return True
    try:
        with open(path, "rb") as handle:
            head = handle.read(4096)
    except OSError:
        return False
    if kind == "results":
        if RESULTS_JSON.match(head):  # and sealed unchanged: JSON is edited by hand (where no seals: the marker)
            from .seal import file_sealed
            return file_sealed(path) is not False
        return _is_results_parquet(path, head)
    if kind == "report":
        return _REPORT in head[:1024] and _unedited(path)
    header = _first_row(head)
    if kind == "rejects":
        return header[-2:] == ["line", "reason"]
    if kind == "export":
        if not {"status", "model", "coef"} <= set(header):
            return False
        from .seal import file_sealed
        sealed = file_sealed(path)
        return sealed if sealed is not None else _export_shaped(path)  # no seals here: its shape alone
    raise ValueError(f"unknown output kind {kind!r}")


EXPORT_STATUSES = frozenset({"accepted", "overridden", "held", "pending", "stale"})


def _export_shaped(path: Path) -> bool:
    """Every row of an existing export still as ``ledger export`` writes them: the header's number of fields, a
    status it writes, one ``ledger_head`` throughout.  A line added by hand (or a file of one's own under the
    export's header) is then not replaced; a number edited in place cannot be told from the command's own."""
    try:
        with open(path, newline="", encoding="utf-8-sig") as handle:
            rows = csv.reader(handle)
            header = next(rows, [])
            if not header or "status" not in header:
                return False
            at, width = header.index("status"), len(header)
            head_at = header.index("ledger_head") if "ledger_head" in header else None
            heads = set()
            for row in rows:
                if len(row) != width or row[at] not in EXPORT_STATUSES:
                    return False
                if head_at is not None:
                    heads.add(row[head_at])
            return len(heads) <= 1
    except (OSError, UnicodeDecodeError, csv.Error):
        return False


def _check_folder(path: Path) -> None:
    parent = path.parent
    if not parent.exists():
        raise DataError(f"no such folder {parent}; create it first", path=str(path))
    if not parent.is_dir():
        raise DataError(f"{parent} is not a folder", path=str(path))
    if not os.access(parent, os.W_OK | os.X_OK):
        why = "on a read-only file system" if _read_only(parent) else "permission denied"
        raise DataError(f"cannot write in the folder {parent} ({why})", path=str(path))


def _read_only(folder: Path) -> bool:
    try:
        return bool(os.statvfs(folder).f_flag & os.ST_RDONLY)
    except (OSError, AttributeError):  # no statvfs here: say what access() said
        return False


def _check_existing(path: Path, kind: str) -> None:
    if not os.path.lexists(path):
        return
    if not path.exists():  # a dangling link: writing replaces the link, never its (missing) target
        return
    if kind == "results-folder":
        if not path.is_dir():
            raise DataError("exists and is not a folder; --engine dask writes a folder of Parquet parts",
                            path=str(path))
    elif path.is_dir():
        raise DataError("is a folder; expected a file name", path=str(path))
    elif not path.is_file():
        raise DataError("is not a regular file", path=str(path))
    if not is_own(path, kind):
        raise DataError(f"exists and is not {KIND_NAMES[kind]}{_why_not_own(path, kind)}; pricefold replaces only "
                        "its own earlier output (remove it or choose another name)", path=str(path))


def _resolved(path: Path) -> Path:
    try:
        return path.resolve()
    except (OSError, RuntimeError):  # a symlink loop: compare it as written
        return path.absolute()


def _same_file(a: Path, b: Path) -> bool:
    try:
        return os.path.samefile(a, b)
    except OSError:
        return False


def _why_not_own(path: Path, kind: str) -> str:
    """' (changed since it was written)' / ' (no seal: …)' for an export, a JSON results file or a page that looks
    like one; else ''."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(4096)
    except OSError:
        return ""
    if (kind == "export" and {"status", "model", "coef"} <= set(_first_row(head))) or (
            kind == "results" and RESULTS_JSON.match(head)):
        from .seal import seal_state
        return {"absent": " (no seal: edited by a program that saved a new file, copied, or written before seals)",
                "changed": " (changed since it was written)"}.get(seal_state(path), "")
    if kind == "report" and _REPORT in head[:1024]:
        from .seal import intact
        return " (changed since it was written)" if intact(path.read_bytes()) is False else \
            " (no seal: removed or reformatted, or written before seals)"
    return ""


def _unedited(path: Path) -> bool:
    """A report page's seal still matches it (a page without one — its seal removed or reformatted, or made
    before seals — is not replaced: the tag alone let an edit be written over)."""
    from .seal import intact
    try:
        content = path.read_bytes()
    except OSError:
        return False
    return intact(content) is True


def _first_row(head: bytes) -> list[str]:
    text = head.decode("utf-8", "replace").lstrip("\ufeff")
    try:
        return next(csv.reader(io.StringIO(text)), [])
    except csv.Error:
        return []


def _is_results_parquet(path: Path, head: bytes) -> bool:
    if not head.startswith(b"PAR1"):
        return False
    try:
        import pyarrow.parquet as pq
        return b"pricefold" in (pq.read_schema(path).metadata or {})
    except Exception:  # noqa: BLE001 - any unreadable Parquet file is simply not ours
        return False
