"""Text input files as they are on disk: what a file is, how to open it, its delimiter, its lines.

Gzip is recognised by its magic bytes, not its name; a UTF-8 byte-order mark is skipped; the delimiter
is found from the header line.  Only regular files and folders are opened: a named pipe or a device is
refused before any read could block.  Physical lines end with CRLF, CR or LF, as both csv readers
count them (``rows_are_lines``, ``line_bounds``).
"""
from __future__ import annotations

import csv
import gzip
import io
import itertools
import os
import re
import stat
import sys
import zlib
from pathlib import Path

import numpy as np

from ..errors import DataError, first_line

GZIP_MAGIC = b"\x1f\x8b"
DELIMITERS = (",", ";", "\t", "|")
BLOCK = 1 << 24

# A cell may be as long as the file (a 10 MB note in an ignored column is still a valid file).
csv.field_size_limit(min(sys.maxsize, 2 ** 31 - 1))


def regular_or_folder(path: Path, expected: str) -> bool:
    """Is ``path`` a folder (True) or a regular file (False)?  One line for anything else: missing,
    unreadable, or a pipe or device that a read would block on.  ``expected``: e.g. "a data file"."""
    try:
        info = os.stat(path)
    except FileNotFoundError:
        raise DataError("file not found", path=str(path)) from None
    except OSError as exc:
        raise DataError(f"cannot read the file ({exc.strerror})", path=str(path)) from None
    if not stat.S_ISDIR(info.st_mode) and not stat.S_ISREG(info.st_mode):
        raise DataError(f"not a regular file (a pipe or a device); expected {expected}", path=str(path))
    return stat.S_ISDIR(info.st_mode)


def check_file(path: Path) -> None:
    """One clear error for a file that is missing, not a regular file or folder, unreadable, empty or not text."""
    if regular_or_folder(path, "a data file"):
        return
    try:
        with open_bytes(path) as handle:
            head = handle.read(8192)
    except (OSError, EOFError, zlib.error) as exc:
        raise DataError(f"cannot read the file ({compressed_trouble(exc)})", path=str(path)) from None
    if not head:
        raise DataError("the file is empty; expected a header line and rows below it", path=str(path))


# Compressions other than gzip, by their first bytes (each format's published magic number): their bytes read as
# text said only "line 1 holds a NUL byte, as a binary file does" (a trial's .csv.bz2 named .csv).
OTHER_COMPRESSIONS = ((re.compile(rb"BZh[1-9]1AY&SY"), "bzip2", "bunzip2 FILE"),
                      (re.compile(rb"\xfd7zXZ\x00"), "xz", "unxz FILE"), (re.compile(rb"PK\x03\x04"), "zip", "unzip FILE"),
                      (re.compile(rb"\x28\xb5\x2f\xfd"), "zstd", "unzstd FILE"))


def check_text(path: Path) -> None:
    """One clear error for a text file that is binary.  (Bytes that are not UTF-8 matter only in the header
    and the needed columns: the readers name their line and column.)"""
    with open_bytes(path) as handle:
        head = handle.read(8192)
    for mark, name in ((b"\xff\xfe\x00\x00", "UTF-32"), (b"\x00\x00\xfe\xff", "UTF-32"),
                       (b"\xff\xfe", "UTF-16"), (b"\xfe\xff", "UTF-16")):
        if head.startswith(mark):
            raise DataError(f"expected UTF-8 text (CSV or TSV); this is {name} text (its byte-order mark says so): "
                            "save it as UTF-8", path=str(path))
    for mark, name, undo in OTHER_COMPRESSIONS:
        if mark.match(head):
            raise DataError(f"expected CSV or TSV text, or gzip-compressed text; this is {name}-compressed: "
                            f"decompress it first ({undo})", path=str(path))
    if b"\x00" in head:
        line = head.count(b"\n", 0, head.index(b"\x00")) + 1
        raise DataError(f"expected UTF-8 text (CSV or TSV); line {line} holds a NUL byte (0x00), as a binary file "
                        "does", path=str(path))


def compressed_trouble(exc: BaseException) -> str:
    """What went wrong reading a (possibly compressed) file, in a few words."""
    text = first_line(exc)
    if isinstance(exc, EOFError) or "truncated" in text.lower() or "end-of-stream" in text.lower():
        return "the compressed file is cut short"
    if isinstance(exc, (zlib.error, gzip.BadGzipFile)) or "gzip" in text.lower() or "zlib" in text.lower():
        return f"the compressed file is damaged: {text}"
    return getattr(exc, "strerror", None) or text


def is_gzip(path: Path) -> bool:
    with open(path, "rb") as handle:
        return handle.read(2) == GZIP_MAGIC


def open_bytes(path: Path):
    """The file's content as bytes (decompressed when it is gzip, whatever its name)."""
    return gzip.open(path, "rb") if is_gzip(path) else open(path, "rb")


def open_text(path: Path, errors: str = "strict"):
    """The file as UTF-8 text for Python's csv module: no newline translation, a byte-order mark skipped."""
    return io.TextIOWrapper(open_bytes(path), encoding="utf-8-sig", errors=errors, newline="")


def arrow_stream(path: Path):
    """The file as a pyarrow input stream, decompressed when it is gzip (native: no Python object inside)."""
    import pyarrow as pa
    return pa.input_stream(str(path), compression="gzip" if is_gzip(path) else None)


def header_line(path: Path) -> str:
    """The first physical line (quoted line breaks kept whole), decoded, without its line end."""
    try:
        with open_text(path, errors="surrogateescape") as handle:  # later lines may hold any bytes
            text = _first_record(handle)
        text.encode("utf-8")
        return text
    except UnicodeEncodeError:
        raise DataError("expected UTF-8 text in the header line", path=str(path), line=1) from None
    except (OSError, EOFError, zlib.error) as exc:
        raise DataError(f"cannot read the file ({compressed_trouble(exc)})", path=str(path)) from None


def _first_record(handle) -> str:
    """Text of the header record: lines joined until the quotes balance."""
    text = ""
    for line in handle:
        text += line
        if text.count('"') % 2 == 0:
            break
    return text.rstrip("\r\n")


def check_quotes(path: Path, start: int, end: int, found: int, width: int, delimiter: str = ",") -> None:
    """One line for a record over physical lines ``start``…``end`` (``found`` fields, ``width`` expected)
    that a missing closing quote made: otherwise every later line would become one cell, rejected or, in
    a row's last field, silently kept.  An odd count of quotes in those lines: the quote never closes (the
    record ran to the end of the file); an even count with the wrong number of fields: it closed too late.
    A record on one line (the file's last, ``start == end``): the quote never closes when a strict reader
    meets the end of the file inside a quoted field (a count cannot tell: the quote in ``5" box`` is text)."""
    with open_text(path, errors="surrogateescape") as handle:
        text = "".join(itertools.islice(handle, start - 1, end))
    if start == end:
        _check_last_line(path, start, text, width, delimiter)
        return
    if text.count('"') % 2:
        raise DataError(f"a quote opens on this line and is never closed: lines {start}-{end} (the end of the "
                        f"file) would be one cell; expected {width} fields a row", path=str(path), line=start)
    if found != width:
        raise DataError(f"a quoted field opens on this line and runs to line {end}, making one row of "
                        f"{found} field{'s' * (found != 1)} (expected {width}); a closing quote is probably missing",
                        path=str(path), line=start)


def check_last_line(path: Path, line: int, width: int, delimiter: str = ",", text: str | None = None) -> None:
    """One line when the file's last physical line (``line``, one row; ``text``, when the caller has read it)
    opens a quote it never closes.  Both readers end such a cell at the end of the file and keep the row: with
    the right number of fields (the quote in the last one) nothing else would tell.  The line is read from the
    file's end (a gzip file is read through)."""
    text = last_line(path) if text is None else text
    if '"' in text:
        _check_last_line(path, line, text, width, delimiter)


def _check_last_line(path: Path, line: int, text: str, width: int, delimiter: str) -> None:
    try:
        list(csv.reader([text], delimiter=delimiter, strict=True))
    except csv.Error as exc:
        if "unexpected end of data" in str(exc):
            raise DataError(f"a quote opens on this line, the last of the file, and is never closed; expected "
                            f"{width} fields a row", path=str(path), line=line) from None


def last_line(path: Path) -> str:
    """The file's last physical line with its line end (CRLF, CR or LF), decoded leniently."""
    if is_gzip(path):
        with gzip.open(path, "rb") as handle:
            return _count_lines(iter(lambda: handle.read(BLOCK), b""), False)[1]
    with open(path, "rb") as handle:
        size = handle.seek(0, os.SEEK_END)
        back = 1 << 16
        while True:  # read back from the end until the line before the last one ends in what was read
            handle.seek(max(0, size - back))
            tail = handle.read()
            if back >= size or _from_last_line(tail) != tail:
                break
            back *= 4
    return _from_last_line(tail).decode("utf-8", "surrogateescape")


def _from_last_line(data: bytes) -> bytes:
    """``data`` from the start of its last line (a line end at the very end belongs to that line; only that line
    is copied)."""
    end = len(data) - (2 if data.endswith(b"\r\n") else 1 if data.endswith((b"\n", b"\r")) else 0)
    return data[max(data.rfind(b"\n", 0, end), data.rfind(b"\r", 0, end)) + 1:]


def split_header(text: str, delimiter: str) -> list[str]:
    try:
        return next(csv.reader([text], delimiter=delimiter), [])
    except csv.Error:
        return []


def sniff_delimiter(path: Path, wanted: list[str], preferred: str | None) -> str:
    """The delimiter whose split of the header names every ``wanted`` column (``preferred`` first, then
    comma, semicolon, tab, bar); failing that, the one giving the most fields (so the error names them)."""
    text = header_line(path)
    order = list(dict.fromkeys([preferred, *DELIMITERS] if preferred else DELIMITERS))
    splits = {d: split_header(text, d) for d in order}
    for delimiter in order:
        if all(name in splits[delimiter] for name in wanted):
            return delimiter
    return max(order, key=lambda d: len(splits[d]))  # ties: the first in order


def rows_are_lines(path: Path, n_rows: int) -> tuple[bool, str | None]:
    """Does each of ``n_rows`` data rows take exactly one physical line, so row i is on line i + 2?  And the
    file's last physical line for ``check_last_line`` when it was read on the way (a gzip file), '' when the
    file holds no quote (nothing to check), else None (read it from the file's end).

    Without a quote or a carriage return in the file it must (a line break can only hide in quotes, and
    pyarrow keeps a blank line as a row of empty cells, ``ignore_empty_lines=False``): one pass of searches
    over blocks read into one buffer settles a plain file (a memory map would add the whole file to the
    process's resident memory).  Otherwise the line ends are counted (CRLF, CR or LF, as both csv readers
    count them) and compared.
    """
    if is_gzip(path):
        with gzip.open(path, "rb") as handle:
            lines, last = _count_lines(iter(lambda: handle.read(BLOCK), b""), True)
        return lines - 1 == n_rows, last
    if os.path.getsize(path) == 0:
        return n_rows == 0, None
    with open(path, "rb") as handle:
        returns = quotes = False
        buffer = bytearray(min(BLOCK, os.path.getsize(path)))
        while not returns and (size := handle.readinto(buffer)):
            returns = buffer.find(b"\r", 0, size) >= 0  # then counted with CRs, whatever else is in the file
            quotes = quotes or buffer.find(b'"', 0, size) >= 0
        if not returns and not quotes:
            return True, ""
        handle.seek(0)
        return _count_lines(iter(lambda: handle.read(BLOCK), b""), returns)[0] - 1 == n_rows, None


def _count_lines(blocks, returns: bool) -> tuple[int, str]:
    """Physical lines in a stream of byte blocks: line ends (CRLF counted once), plus an unended last line;
    and the last line (``last_line``).  ``returns``: the stream may hold CR (else only LF is counted: one pass
    instead of three)."""
    ends, last, carry, tail = 0, b"", False, b""  # carry: the previous block ended with CR
    for block in blocks:
        if carry and block[:1] == b"\n":
            ends -= 1  # a CRLF split across blocks
        ends += block.count(b"\n") + (block.count(b"\r") - block.count(b"\r\n") if returns else 0)
        carry = block[-1:] == b"\r"
        last = block[-1:] or last
        start = _from_last_line(block)
        if len(start) < len(block):  # the last line begins in this block
            tail = start
        elif tail.endswith(b"\n") or (tail.endswith(b"\r") and block[:1] != b"\n"):  # ... at its start
            tail = block
        else:  # ... in an earlier block
            tail += block
    return ends + (0 if last in (b"\n", b"\r", b"") else 1), tail.decode("utf-8", "surrogateescape")


def file_bytes(path: Path):
    """The whole file (decompressed when it is gzip) in one ``pyarrow.Buffer`` of Arrow's own memory: pyarrow's
    reader threads may hold it past a failed read and release it without the interpreter."""
    with arrow_stream(path) as stream:
        return stream.read_buffer()


def holds(data: np.ndarray, byte: int) -> bool:
    """Does the (N,) uint8 ``data`` hold ``byte``?  Block by block: no (N,) mask."""
    return any((data[at:at + BLOCK] == byte).any() for at in range(0, len(data), BLOCK))


def line_bounds(data: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``(starts, ends)``: (L,) int64 each, physical line i of the (N,) uint8 ``data`` is
    ``data[starts[i]:ends[i]]`` without its line end (CRLF, CR or LF, as ``_count_lines`` counts them),
    and the next begins after that line end.  An unended last line counts; nothing after the last line
    end is a line."""
    size = len(data)
    ends = _positions(data, ord("\n"))
    after = ends + 1
    if holds(data, ord("\r")):
        returns = _positions(data, ord("\r"))
        ends = np.union1d(returns, ends[(ends == 0) | (data[ends - 1] != ord("\r"))])  # an LF after a CR: one end
        pair = ends[:-1] if len(ends) and ends[-1] == size - 1 else ends  # line ends with a byte after them
        after = ends + 1
        after[:len(pair)] += (data[pair] == ord("\r")) & (data[pair + 1] == ord("\n"))
    starts = np.concatenate([np.zeros(1, np.int64), after])
    if starts[-1] == size:
        return starts[:-1], ends
    return starts, np.append(ends, size)


def empty_lines(path: Path, lines: np.ndarray) -> np.ndarray:
    """(K,) bool: is each of the physical ``lines`` (sorted, 1-based: the header is line 1) empty, no byte before its
    line end?  Read block by block, the positions of one block's LFs at a time (a whole-file copy and its line
    bounds: 2M rows +50 MiB); a file holding a CR (CRLF or CR line ends) through ``line_bounds``."""
    wanted, out = np.asarray(lines, np.int64) - 1, np.zeros(len(lines), bool)
    seen, last, offset = 0, -1, 0  # LFs before the block; the last one's position (-1: the file's start); bytes
    with open_bytes(path) as handle:
        for block in iter(lambda: handle.read(BLOCK), b""):
            data = np.frombuffer(block, np.uint8)
            if holds(data, ord("\r")):
                view = np.frombuffer(file_bytes(path), np.uint8)
                starts, ends = line_bounds(view)
                inside = wanted < len(starts)
                out[inside] = ends[wanted[inside]] == starts[wanted[inside]]
                return out
            ends = np.flatnonzero(data == ord("\n")) + offset
            here = (wanted >= seen) & (wanted < seen + len(ends))  # lines ending in this block
            if here.any():
                k = wanted[here] - seen
                out[here] = ends[k] == np.where(k > 0, ends[np.maximum(k - 1, 0)], last) + 1
            last = ends[-1] if len(ends) else last
            seen, offset = seen + len(ends), offset + len(data)
    return out  # an unended last line holds a byte


def _positions(data: np.ndarray, byte: int) -> np.ndarray:
    """(K,) int64 positions of ``byte`` in ``data``, found block by block."""
    found = [np.flatnonzero(data[at:at + BLOCK] == byte) + at for at in range(0, len(data), BLOCK)]
    return np.concatenate(found) if found else np.zeros(0, np.int64)
