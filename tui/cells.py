"""Text measured in terminal cells, not characters: CJK and emoji take two, combining marks none.

Rows of the list are cut and padded here so that they line up whatever the names hold; the cutting
rules are ``fitcore.widths``' (shared with ``pricefold show``), measured with the screen's own ``cell_len``.
"""
from __future__ import annotations

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
