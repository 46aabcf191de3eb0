"""Text measured in terminal cells, not characters: CJK and emoji take two, combining marks none.

Rows of the list are cut and padded here so that they line up whatever the names hold; the cutting
rules are ``fitcore.widths``' (shared with ``pricefold show``), measured with the screen's own ``cell_len``.
"""
from __future__ import annotations

from unicodedata import is_normalized

import numpy as np
from rich.cells import cell_len

from fitcore.data.keys import SEPARATOR
from fitcore.text import clean, escaped, revealed, unstable
from fitcore.widths import cut_end, distinct_keys, fit_key


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

    ``parts``: product first, then the segment values.  Keys shown together: ``key_labels``.
    """
    return pad(fit_key(parts, width, SEPARATOR, cell_len), width)


def key_labels(keys: list[tuple[str, ...]], width: int) -> list[str]:
    """``key_label`` of each of the series ``keys`` shown together, no two of different series reading the same
    (``fitcore.widths.distinct_keys``)."""
    return [pad(label, width) for label in distinct_keys(keys, width, SEPARATOR, cell_len)]


def longest_label(columns: list, cap: int | None = None) -> int:
    """Cells of the longest series label the key ``columns`` (Arrow text, one per key part, S each) make when
    shown (each part ``clean``'s form, ``revealed`` as beside a part that reads the same, joined by
    ``SEPARATOR``; a row with a null part makes none), or ``cap`` when one is at least that long.

    Counted without a Python object per series, from the arrays' buffers (importing ``pyarrow.compute``,
    0.1 s, held the first drawing of the list back): an ASCII character shows in one cell (a control as its
    one-cell picture), any other as its shown form measures alone (a CJK character two cells, an escape form
    ``⟨U+202E⟩`` eight), each distinct code point measured once; in a value not in NFC form (checked only where
    a character NFC may change is, a combining mark), each such character as its escape form (``cafe⟨U+0301⟩``,
    as beside ``café``).  A label holding a joiner, a variation selector or a tag character (whose width depends
    on their neighbours) or a space at a part's end (``East⟨U+0020⟩``) is measured whole."""
    if not columns or not len(columns[0]):
        return 0
    n = len(columns[0])
    shown = np.full(n, len(SEPARATOR) * (len(columns) - 1), dtype=np.int64)
    whole = np.zeros(n, dtype=bool)  # measured whole: their characters' widths depend on their neighbours
    valid = np.ones(n, dtype=bool)
    for column in columns:
        cells, context, present = _cells(column)
        shown += cells
        whole |= context
        valid &= present
    if not valid.any():
        return 0
    for s in np.flatnonzero(whole & valid).tolist():
        shown[s] = cell_len(SEPARATOR.join(revealed(clean(column[s].as_py())) for column in columns))
    longest = int(shown[valid].max())
    return longest if cap is None else min(longest, cap)


MEASURED_WHOLE = frozenset([0x200D, 0xFE0F, *range(0xE0020, 0xE0080)])  # joiner, emoji selector, tags


def _cells(array) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """((S,) cells, (S,) to be measured whole, (S,) not null) of an Arrow string or large string array: each
    value's ASCII bytes a cell each, and each other character the cells of its ``clean`` form (code points
    decoded from the UTF-8 bytes, summed per value with one cumulative sum), in a value not in NFC form each
    character NFC may change as its escape form (``revealed``); measured whole, a value holding a character of
    MEASURED_WHOLE, or starting or ending with a space."""
    import pyarrow as pa
    if isinstance(array, pa.ChunkedArray):
        array = array.combine_chunks()
    n, start = len(array), array.offset
    validity, offsets, data = array.buffers()[:3]
    width = np.int64 if pa.types.is_large_string(array.type) else np.int32
    ends = np.frombuffer(offsets, width, count=n + 1, offset=start * np.dtype(width).itemsize).astype(np.int64)
    cells = np.diff(ends)
    context = np.zeros(n, dtype=bool)
    if data is not None and ends[-1] > ends[0]:
        body = np.frombuffer(data, np.uint8, count=int(ends[-1] - ends[0]), offset=int(ends[0]))
        at = ends - ends[0]  # a space at either end (an empty value's bytes are its neighbour's: not counted)
        context = ((body.take(at[:-1], mode="clip") == 0x20) | (body.take(at[1:] - 1, mode="clip") == 0x20)) \
            & (cells > 0)
        if body.max() >= 0x80:  # not all ASCII: each lead byte's character, decoded
            lead = np.flatnonzero(body >= 0xC0)
            last = len(body) - 1  # a byte past the end is only read for a shorter character, and not used
            b0, c1, c2, c3 = (body[np.minimum(lead + k, last)].astype(np.int64) & (0xFF if k == 0 else 0x3F)
                              for k in range(4))
            code = np.where(b0 < 0xE0, ((b0 & 0x1F) << 6) | c1,
                            np.where(b0 < 0xF0, ((b0 & 0x0F) << 12) | (c1 << 6) | c2,
                                     ((b0 & 0x07) << 18) | (c1 << 12) | (c2 << 6) | c3))
            points = np.flatnonzero(np.bincount(code))  # each distinct character, measured once
            size = np.zeros(int(points[-1]) + 1, dtype=np.int64)
            size[points] = [cell_len(clean(chr(c))) for c in points.tolist()]
            value = np.searchsorted(ends[1:] - ends[0], lead, side="right")  # the value each lead byte is in
            multi = np.where(b0 < 0xE0, 2, np.where(b0 < 0xF0, 3, 4))  # bytes of that character
            cells = cells - np.bincount(value, weights=multi - size[code], minlength=n).astype(np.int64)
            odd = np.zeros(len(size), dtype=bool)
            odd[[c for c in MEASURED_WHOLE if c < len(size)]] = True
            context[value[odd[code]]] = True
            changing = [c for c in points.tolist() if unstable(chr(c))]  # NFC may change: revealed where not in NFC
            if changing:
                more = np.zeros(len(size), dtype=np.int64)
                more[changing] = [len(escaped(chr(c))) - size[c] for c in changing]
                held = more[code] != 0
                holders = np.unique(value[held])  # the values holding one, checked one by one
                unnormal = np.zeros(n, dtype=bool)
                texts = array.take(pa.array(holders)).to_pylist()
                unnormal[holders[[not is_normalized("NFC", text) for text in texts]]] = True
                keep = held & unnormal[value]
                cells = cells + np.bincount(value[keep], weights=more[code[keep]], minlength=n).astype(np.int64)
    present = (np.unpackbits(np.frombuffer(validity, np.uint8), bitorder="little")[start:start + n].astype(bool)
               if array.null_count else np.ones(n, dtype=bool))
    return cells, context, present
