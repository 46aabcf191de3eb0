"""Text measured in terminal cells, not characters: CJK and emoji take two, combining marks none.

Rows of the list are cut and padded here so that they line up whatever the names hold; the cutting
rules are ``fitcore.widths``' (shared with ``pricefold show``), measured with the screen's own ``cell_len``.
"""
from __future__ import annotations

import numpy as np
from rich.cells import cell_len

from fitcore.data.keys import SEPARATOR
from fitcore.widths import cut_end, fit_key


def cut(text: str, width: int) -> str:
    """``text`` in at most ``width`` cells: cut at a character boundary with '…' when it is longer."""
    return cut_end(text, width, cell_len)


def wrapped(text: str, width: int, lines: int) -> list[str]:
    """``text`` in at most ``lines`` lines of ``width`` cells, broken between words; the last one cut with '…'
    where the rest does not fit."""
    out, rest = [], text
    while rest and len(out) < lines - 1 and cell_len(rest) > width:
        head = cut_end(rest, width + 1, cell_len)[:-1]  # what fits, without the ellipsis
        space = head.rfind(" ")
        head = head[:space] if space > 0 else head
        out.append(head)
        rest = rest[len(head):].lstrip(" ")
    return out + [cut(rest, width)]


def percent(share: float) -> str:
    """A share as a whole percentage, "—" when there is none; one that rounds to zero is "0%" whatever its
    sign (a "-0%" read as a number below zero that is not there)."""
    if share != share:
        return "—"
    text = f"{share * 100:.0f}%"
    return "0%" if text == "-0%" else text


def pad(text: str, width: int, right: bool = False) -> str:
    """``text`` cut to ``width`` cells and padded with spaces to exactly that many."""
    text = cut(text, width)
    space = " " * (width - cell_len(text))
    return space + text if right else text + space


def key_label(parts: tuple[str, ...], width: int) -> str:
    """A series key in exactly ``width`` cells, every part keeping a share and its ends (``fit_key``).

    ``parts``: product first, then the segment values.  Rows of different series read differently.
    """
    return pad(fit_key(parts, width, SEPARATOR, cell_len), width)


def longest_label(columns: list) -> int:
    """Characters of the longest label the key ``columns`` (Arrow text, one per key part, S each) make when
    joined by ``SEPARATOR`` (a row with a null part makes none): as ``pyarrow.compute``'s ``utf8_length`` of
    ``binary_join_element_wise`` counts them, read from the arrays' buffers, since importing
    ``pyarrow.compute`` (0.1 s) held the first drawing of the list back."""
    if not columns or not len(columns[0]):
        return 0
    total = np.full(len(columns[0]), len(SEPARATOR) * (len(columns) - 1), dtype=np.int64)
    valid = np.ones(len(columns[0]), dtype=bool)
    for column in columns:
        chars, present = _characters(column)
        total += chars
        valid &= present
    return int(total[valid].max()) if valid.any() else 0


def _characters(array) -> tuple[np.ndarray, np.ndarray]:
    """((S,) characters, (S,) not null) of an Arrow string or large string array: each value's bytes less its
    UTF-8 continuation bytes (10xxxxxx), counted with one cumulative sum over the array's bytes."""
    import pyarrow as pa
    if isinstance(array, pa.ChunkedArray):
        array = array.combine_chunks()
    n, start = len(array), array.offset
    validity, offsets, data = array.buffers()[:3]
    width = np.int64 if pa.types.is_large_string(array.type) else np.int32
    ends = np.frombuffer(offsets, width, count=n + 1, offset=start * np.dtype(width).itemsize).astype(np.int64)
    chars = np.diff(ends)
    if data is not None and ends[-1] > ends[0]:
        body = np.frombuffer(data, np.uint8, count=int(ends[-1] - ends[0]), offset=int(ends[0]))
        if body.max() >= 0x80:  # not all ASCII: continuation bytes are not characters
            counted = np.concatenate(([0], np.cumsum((body & 0xC0) == 0x80)))
            chars = chars - (counted[ends[1:] - ends[0]] - counted[ends[:-1] - ends[0]])
    present = (np.unpackbits(np.frombuffer(validity, np.uint8), bitorder="little")[start:start + n].astype(bool)
               if array.null_count else np.ones(n, dtype=bool))
    return chars, present
