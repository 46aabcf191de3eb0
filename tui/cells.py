"""Text measured in terminal cells, not characters: CJK and emoji take two, combining marks none.

Rows of the list are cut and padded here so that they line up whatever the names hold.
"""
from __future__ import annotations

import unicodedata

from rich.cells import cell_len

from fitcore.data.keys import SEPARATOR

ELLIPSIS = "…"


def cut(text: str, width: int) -> str:
    """``text`` in at most ``width`` cells: cut at a character boundary with '…' when it is longer."""
    if cell_len(text) <= width:
        return text
    if width <= 0:
        return ""
    out, used = [], 0
    for ch in text:
        size = cell_len(ch)
        if used + size > width - 1:
            break
        out.append(ch)
        used += size
    while out and unicodedata.combining(out[-1]):  # a mark whose base may be next: keep base and marks together
        out.pop()
    return "".join(out) + ELLIPSIS


def pad(text: str, width: int, right: bool = False) -> str:
    """``text`` cut to ``width`` cells and padded with spaces to exactly that many."""
    text = cut(text, width)
    space = " " * (width - cell_len(text))
    return space + text if right else text + space


def key_label(parts: tuple[str, ...], width: int) -> str:
    """A series key in ``width`` cells where the segment values survive and the product name gives way.

    ``parts``: product first, then the segment values.  Rows that differ only in a segment stay distinct.
    """
    full = SEPARATOR.join(parts)
    if cell_len(full) <= width or len(parts) < 2:
        return pad(full, width)
    tail = SEPARATOR + SEPARATOR.join(parts[1:])
    room = width - cell_len(tail)
    if room >= 4:  # a few cells of the product, then every segment
        return pad(cut(parts[0], room) + tail, width)
    return pad(ELLIPSIS + _last_cells(SEPARATOR.join(parts[1:]), width - 1), width)


def _last_cells(text: str, width: int) -> str:
    out, used = [], 0
    for ch in reversed(text):
        size = cell_len(ch)
        if used + size > width:
            break
        out.append(ch)
        used += size
    return "".join(reversed(out)).lstrip()
