"""Text measured in terminal cells, not characters: CJK and emoji take two, combining marks none.

Rows of the list are cut and padded here so that they line up whatever the names hold; the cutting
rules are ``fitcore.widths``' (shared with ``pricefold show``), measured with the screen's own ``cell_len``.
"""
from __future__ import annotations

import numpy as np
from rich.cells import cell_len

from fitcore.data.keys import SEPARATOR
from fitcore.text import clean
from fitcore.widths import cut_end, distinct_keys, fit_key

MOST_CELLS = 10  # cells one character may show in: its escape form, "⟨U+10FFFF⟩"


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


def key_labels(keys: list[tuple[str, ...]], width: int) -> list[str]:
    """``key_label`` of each of the series ``keys`` shown together, no two of different series reading the same
    (``fitcore.widths.distinct_keys``)."""
    return [pad(label, width) for label in distinct_keys(keys, width, SEPARATOR, cell_len)]


def longest_label(columns: list, cap: int | None = None) -> int:
    """Cells of the longest series label the key ``columns`` (Arrow text, one per key part, S each) make when
    shown (each part ``clean``'s form, joined by ``SEPARATOR``; a row with a null part makes none), or ``cap``
    when one is at least that long.

    Counted without a Python object per series where the labels are ASCII: an ASCII label shows a cell a
    character (a control as its one-cell picture), counted from the arrays' buffers, since importing
    ``pyarrow.compute`` (0.1 s) held the first drawing of the list back.  A label with other characters may
    show wider (a CJK character takes two cells, an escape form ``⟨U+202E⟩`` eight) or narrower (a combining
    mark none): those are measured one by one, longest possible first (a character shows in ten cells at
    most), until none left could be longer than the longest found."""
    if not columns or not len(columns[0]):
        return 0
    n = len(columns[0])
    chars = np.full(n, len(SEPARATOR) * (len(columns) - 1), dtype=np.int64)
    wide = np.zeros(n, dtype=np.int64)  # non-ASCII characters
    valid = np.ones(n, dtype=bool)
    for column in columns:
        counted, other, present = _characters(column)
        chars += counted
        wide += other
        valid &= present
    if not valid.any():
        return 0
    plain = valid & (wide == 0)
    longest = int(chars[plain].max()) if plain.any() else 0
    bound = np.where(valid & (wide > 0), chars + (MOST_CELLS - 1) * wide, -1)
    order = np.argsort(-bound, kind="stable")
    for s in order[:int(np.count_nonzero(bound > longest))].tolist():
        if bound[s] <= longest or (cap is not None and longest >= cap):
            break
        shown = SEPARATOR.join(clean(column[s].as_py()) for column in columns)
        longest = max(longest, cell_len(shown))
    return longest if cap is None else min(longest, cap)


def _characters(array) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """((S,) characters, (S,) of them not ASCII, (S,) not null) of an Arrow string or large string array: each
    value's bytes less its UTF-8 continuation bytes (10xxxxxx), and its lead bytes (11xxxxxx), counted with
    cumulative sums over the array's bytes."""
    import pyarrow as pa
    if isinstance(array, pa.ChunkedArray):
        array = array.combine_chunks()
    n, start = len(array), array.offset
    validity, offsets, data = array.buffers()[:3]
    width = np.int64 if pa.types.is_large_string(array.type) else np.int32
    ends = np.frombuffer(offsets, width, count=n + 1, offset=start * np.dtype(width).itemsize).astype(np.int64)
    chars = np.diff(ends)
    other = np.zeros(n, dtype=np.int64)
    if data is not None and ends[-1] > ends[0]:
        body = np.frombuffer(data, np.uint8, count=int(ends[-1] - ends[0]), offset=int(ends[0]))
        if body.max() >= 0x80:  # not all ASCII: continuation bytes are not characters
            at, before = ends[1:] - ends[0], ends[:-1] - ends[0]
            counted = np.concatenate(([0], np.cumsum((body & 0xC0) == 0x80)))
            chars = chars - (counted[at] - counted[before])
            leads = np.concatenate(([0], np.cumsum(body >= 0xC0)))
            other = leads[at] - leads[before]
    present = (np.unpackbits(np.frombuffer(validity, np.uint8), bitorder="little")[start:start + n].astype(bool)
               if array.null_count else np.ones(n, dtype=bool))
    return chars, other, present
