"""Reading observation files into a ``Dataset``, accounting for every row.

What a file is (``file_kind``), its header and delimiter, then the readers by format — CSV and TSV
(``read_csv``), Parquet files and folders (``read_parquet``) — give every data row's needed columns;
rows that cannot be used are rejected with a reason (``validation``), never dropped silently: rows
read = rows kept + rows rejected.  The rejected rows go to a rejects file (``rejects``).
"""
from __future__ import annotations

import difflib
from pathlib import Path

import numpy as np

from ..errors import DataError
from ..text import quoted
from .columns import RESULTS_JSON, Columns, file_sha256, is_parquet_name
from .dataset import Dataset, from_columns
from .rejects import Rejects
from .textfile import check_file, check_text, header_line, sniff_delimiter, split_header

__all__ = ["Columns", "Rejects", "check_columns", "delimiter_of", "file_kind", "load", "load_with_rejects",
           "read_rows"]

CSV_SUFFIXES = {".csv": ",", ".tsv": "\t", ".txt": None}


def file_kind(path: Path) -> tuple[str, str | None]:
    """('csv', the delimiter its name suggests, or None) or ('parquet', None)."""
    if path.is_dir():
        return "parquet", None
    name = path.with_suffix("") if path.suffix.lower() == ".gz" else path
    if is_parquet_name(name):
        return "parquet", None
    if name.suffix.lower() in CSV_SUFFIXES:
        return "csv", CSV_SUFFIXES[name.suffix.lower()]
    results = ("; .json is pricefold's results format, not a data format (a results file is read with 'pricefold "
               "show' or 'pricefold triage')") if name.suffix.lower() == ".json" else ""
    packed = {".bz2": "bzip2", ".xz": "xz", ".zip": "zip", ".zst": "zstd"}.get(name.suffix.lower())
    if packed:  # the name says how it is compressed: only gzip is read (``textfile.OTHER_COMPRESSIONS``)
        results = f"; {packed}-compressed: decompress it first (only gzip is read)"
    raise DataError(f"expected a .csv, .tsv, .txt (optionally .gz) or .parquet file, got {quoted(path.name)}{results}",
                    path=str(path))


def load(path: str | Path, columns: Columns = Columns(), *, sep: str | None = None) -> Dataset:
    """Read ``path`` and group its usable rows into series (see ``load_with_rejects``)."""
    return load_with_rejects(path, columns, sep=sep)[0]


def load_with_rejects(path: str | Path, columns: Columns = Columns(), *,
                      sep: str | None = None) -> tuple[Dataset, Rejects]:
    """The dataset of usable rows, and the rejected rows with their reasons.

    Raises ``DataError`` (one line: file, line, column, what was expected) when
    the file itself cannot be used, or when no row is usable.
    """
    from .validation import reasons

    path = Path(path)
    digest = _digest_beside(path)  # the file's SHA-256, computed while it is read
    try:
        rows, kind, delimiter = read_rows(path, columns, sep)
    except BaseException:
        digest(stop=True)
        raise
    why, usable = reasons(rows, columns.price, columns.volume, columns.weight, columns.date,
                          controls=columns.controls)
    bad = np.flatnonzero(~usable)
    rejects = Rejects(path, kind, delimiter, rows.line[bad], why[bad].tolist(), rows.unread)
    if len(bad) == rows.n_rows:
        raise no_usable_rows(rejects, columns)
    keep = np.flatnonzero(usable) if len(bad) else slice(None)  # a clean file is not copied
    keys = {name: values[keep] for name, values in rows.keys.items()}
    number = lambda name: rows.numbers[name][0][keep]  # noqa: E731
    source = {"path": str(path.resolve()), "sha256": digest(), "rows": rows.n_rows,
              "rejected": int(len(bad))}
    dataset = from_columns(keys, number(columns.price), number(columns.volume),
                           weight=number(columns.weight) if columns.weight else None,
                           date=rows.date[0][keep] if columns.date else None, line=rows.line[keep], source=source,
                           controls={name: number(name) for name in columns.controls})
    return dataset, rejects


def no_usable_rows(rejects: Rejects, columns: Columns) -> DataError:
    """Every row rejected: the counts by reason, and the first rejected row's line, column, reason and cell
    (``first_rejected``)."""
    from .validation import summary
    column, said = first_rejected(rejects, columns)
    return DataError(f"no usable rows ({summary(rejects.reasons)}); the first is {said}",
                     path=str(rejects.path), column=column, **place(rejects.kind, int(rejects.lines[0])))


def place(kind: str, line: int) -> dict:
    """``DataError``'s keyword for where a row is: a text file's ``line``, a Parquet file's ``row``."""
    return {"row": line} if kind == "parquet" else {"line": line}


def first_rejected(rejects: Rejects, columns: Columns) -> tuple[str | None, str]:
    """``(column, words)``: the column of the first rejected row's reason and the reason with its cell, a
    decimal comma or a thousands separator (the usual cause of a whole column of non-numbers) said as such,
    a date's the form it is read in."""
    from .rejects import first_cell
    from .validation import ISO_DATE, is_date_reason, one_reason
    why = rejects.reasons[0]
    column = next((name for name in columns.needed if why.endswith(f" {name}") or why.startswith(f"{name} ")), None)
    date = column is not None and column == columns.date and is_date_reason(why)
    cell = first_cell(rejects, column) if column and (why.startswith("non-numeric ") or date) else None
    said = one_reason(why) + ("" if cell is None else f": {quoted(cell)}")
    return column, said + (f" (expected {ISO_DATE})" if date else decimal_comma_hint(cell) if cell else "")


def decimal_comma_hint(cell: str) -> str:
    """' (a decimal comma? …)' when ``cell`` reads as a number written with a decimal comma, ' (a thousands
    separator, …, or a decimal comma, …?)' when a comma is followed by exactly three digits (5,710: 5710 or
    5.710, a thousand times apart), else ''."""
    import re
    text = cell.strip()
    if re.fullmatch(r"[-+]?[1-9]\d{0,2}(,\d{3})+", text):
        whole = text.replace(",", "")
        if text.count(",") > 1:
            return f" (thousands separators? numbers are read without them: {whole})"
        return (f" (a thousands separator, {whole}, or a decimal comma, {text.replace(',', '.')}? numbers are read "
                "with a decimal point and no thousands separator)")
    if re.fullmatch(r"[-+]?\d*,\d+", text):
        return f" (a decimal comma? numbers are read with a decimal point: {text.replace(',', '.')})"
    return ""


def _digest_beside(path: Path):
    """``digest()`` → the SHA-256 of ``path``.  A regular file is hashed in a thread while it is read
    (hashlib lets go of the interpreter on large blocks); ``digest(stop=True)`` ends that thread early
    (the read failed).  Anything else — a folder, a pipe — is hashed when asked, as before."""
    import hashlib
    import stat
    import threading
    try:
        regular = stat.S_ISREG(path.stat().st_mode)
    except OSError:
        regular = False
    if not regular:
        return lambda stop=False: None if stop else file_sha256(path)
    found, stopping = {}, threading.Event()

    def work():
        try:
            sha = hashlib.sha256()
            with open(path, "rb") as handle:
                for block in iter(lambda: handle.read(1 << 20), b""):
                    if stopping.is_set():
                        return
                    sha.update(block)
            found["sha256"] = sha.hexdigest()
        except OSError:  # hashed again when asked, which raises as reading would
            pass
    thread = threading.Thread(target=work, name="pricefold-sha256", daemon=True)
    thread.start()

    def digest(stop: bool = False) -> str | None:
        if stop:
            stopping.set()
        thread.join()
        return None if stop else found.get("sha256") or file_sha256(path)
    return digest


def read_rows(path: Path, columns: Columns, sep: str | None = None, rows_are: str = "observation"):
    """``(RawRows, kind, delimiter)`` of ``path``: every data row's needed columns, unchecked.  A file without
    a row: "expected at least one ``rows_are``, found only a header" (Parquet: "found none")."""
    check_file(path)
    kind, _ = file_kind(path)
    if kind == "parquet":
        from .read_parquet import parquet_schema, read_parquet_rows
        schema = parquet_schema(path)  # a folder's files found once, for the check and the read
        if b"pricefold" in (schema.metadata or {}) and not set(columns.needed) <= set(schema.names):
            raise results_not_data(path, "")
        check_columns(path, schema.names, columns)
        rows, delimiter, found, names = read_parquet_rows(path, columns, schema), None, "none", schema.names
    else:
        from .read_csv import read_csv_rows
        check_text(path)
        first = header_line(path)
        if RESULTS_JSON.match(first.encode("utf-8", "surrogateescape")):  # before its "delimiter" is looked for
            raise results_not_data(path, " (JSON)")
        delimiter = delimiter_of(path, columns, sep)
        header = split_header(first, delimiter)
        if not [name for name in header if name.strip()]:
            raise DataError("expected a header line naming the columns, found an empty first line", path=str(path),
                            line=1)
        check_columns(path, header, columns)
        rows, found, names = read_csv_rows(path, columns, delimiter, header), "only a header", header
    if rows.n_rows == 0:
        raise DataError(f"expected at least one {rows_are}, found {found}", path=str(path))
    rows.unread = unread_columns(names, columns)
    return rows, kind, delimiter


def results_not_data(path: Path, form: str) -> DataError:
    """A pricefold results file given where data belong (Parquet, or JSON under any name: ``form``)."""
    return DataError(f"this is a pricefold results file{form}, not data: fit the data file it was fitted from, or "
                     "read it with 'pricefold show' or 'pricefold triage'", path=str(path))


def column_names(path: Path, sep: str | None = None, wanted: list[str] = ()) -> list[str]:
    """The column names of a CSV/TSV or Parquet file or folder (``wanted``: names that tell its delimiter)."""
    check_file(path)
    kind, preferred = file_kind(path)
    if kind == "parquet":
        from .read_parquet import parquet_names
        return parquet_names(path)
    return split_header(header_line(path), sep or sniff_delimiter(path, list(wanted), preferred))


def unread_columns(names, columns: Columns) -> tuple[str, ...]:
    """The columns of ``names`` no role of ``columns`` reads (blank names left out: a trailing delimiter's)."""
    return tuple(name for name in dict.fromkeys(names) if name.strip() and name not in columns.needed)


def unread_columns_note(path: Path, unread: tuple[str, ...], columns: Columns, shown: int = 8) -> str:
    """One line naming the data file's columns no role reads, or '' (every column read).  Without a segment,
    the rows of a product are one series whatever another column says: a region column left out merges the
    regions' rows into one curve, without a word otherwise (with a date, their rows would at least clash)."""
    from ..text import clean
    if not unread:
        return ""
    names = header_names(list(unread), shown)
    merged = "" if columns.segments else (f"; every row of a {clean(columns.product)} is one series whatever these say "
                                          "(--segment COL splits them)")
    return f"note: {clean(str(path))}: data column{'s' * (len(unread) > 1)} not used: {names}{merged}"


def delimiter_of(path: Path, columns: Columns, sep: str | None = None) -> str:
    """``sep`` if given, else the delimiter that splits the header into the needed columns."""
    return sep or sniff_delimiter(path, columns.needed, file_kind(path)[1])


def header_names(found: list[str], shown: int = 12, width: int = 40) -> str:
    """The header's names as an error quotes them: the first ``shown``, each cut at ``width`` characters, and a
    count of the rest (a results JSON's one line of 1.4 MB was quoted whole)."""
    names = [quoted(name if len(name) <= width else name[:width - 1] + "…") for name in found[:shown]]
    return ", ".join(names) + (f" and {len(found) - shown} more" if len(found) > shown else "")


def check_columns(path: Path, found: list[str], columns: Columns) -> None:
    """Every needed column present exactly once in the header ``found``, and no name (ignored columns
    too; blank names aside) given twice; else one line naming it."""
    for name in columns.needed:
        if name not in found:
            close = difflib.get_close_matches(name, found, n=1)
            hint = f"; did you mean {quoted(close[0])}?" if close else ""
            if "plan_price" in found and columns.volume not in found:  # the plan given as the data
                hint = "; it reads like a plan file (a 'plan_price' column, no volume): give it with --plan"
            elif name == "plan_price" and not (close and close[0].lower().startswith("plan")):  # data as the plan
                hint = ("; a plan file holds the series' keys and a 'plan_price' column: is this the data file? "
                        "(the data go first, the plan after --plan)")
            raise DataError(f"expected a column {quoted(name)}, found {header_names(found)}{hint}",
                            path=str(path), line=1, column=name)
    first: dict[str, int] = {}
    for i, name in enumerate(found):
        if name.strip() and name in first:  # an ignored column too: which one a reader takes is a guess
            raise DataError(f"the column {quoted(name)} appears twice in the header (fields {first[name] + 1} and "
                            f"{i + 1}); rename one", path=str(path), line=1, column=name)
        first.setdefault(name, i)
