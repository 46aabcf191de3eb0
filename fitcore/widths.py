"""Text fitted to a width: cut at the end or in the middle, and a series key whose parts share a width.

Pure and UI-free, so the triage list (``tui.cells``, measuring terminal cells with the screen's own
measure) and ``pricefold show`` (``cells`` here) cut keys by the one rule: rows of different series
read differently.  ``measure`` gives a string's width; every function cuts at character boundaries.
"""
from __future__ import annotations

import unicodedata
from collections.abc import Callable

ELLIPSIS = "…"
MIN_PART = 4  # width a key part keeps at least ("ab…z"); below that a key shows its segments' ends

Measure = Callable[[str], int]


def cells(text: str) -> int:
    """Terminal cells of ``text`` without a UI library: wide and full-width characters (CJK, most emoji) two,
    combining marks and zero-width characters none, others one."""
    if text.isascii():
        return len(text)
    return sum(0 if unicodedata.combining(ch) or unicodedata.category(ch) in ("Mn", "Me", "Cf")
               else 2 if unicodedata.east_asian_width(ch) in ("W", "F") else 1 for ch in text)


def cut_end(text: str, width: int, measure: Measure = len) -> str:
    """``text`` in at most ``width``: cut with '…' when it is longer (a combining mark stays with its base)."""
    if measure(text) <= width:
        return text
    if width <= 0:
        return ""
    out, used = [], 0
    for ch in text:
        size = measure(ch)
        if used + size > width - 1:
            break
        out.append(ch)
        used += size
    while out and unicodedata.combining(out[-1]):  # a mark whose base may be next: keep base and marks together
        out.pop()
    return "".join(out) + ELLIPSIS


def last(text: str, width: int, measure: Measure = len) -> str:
    """The end of ``text`` in at most ``width``, without leading spaces."""
    out, used = [], 0
    for ch in reversed(text):
        size = measure(ch)
        if used + size > width:
            break
        out.append(ch)
        used += size
    return "".join(reversed(out)).lstrip()


def cut_middle(text: str, width: int, measure: Measure = len) -> str:
    """``text`` in at most ``width``, its middle replaced by '…' when it is longer: both ends stay, where
    names usually differ ("…750 ml bottle" / "…750 ml can", "north-east …centre 12")."""
    if measure(text) <= width:
        return text
    if width <= 2:
        return cut_end(text, width, measure)
    tail = last(text, (width - 1) // 2, measure)
    return cut_end(text, width - measure(tail), measure).rstrip(ELLIPSIS) + ELLIPSIS + tail


def shares(sizes: list[int], room: int) -> list[int]:
    """Width for each of ``sizes`` within ``room`` in all: a part shorter than an even share keeps its whole
    length and leaves the rest to the longer ones, which share it evenly (the first ones get any odd cells)."""
    out = list(sizes)
    if sum(sizes) <= room:
        return out
    left, pending = room, sorted(range(len(sizes)), key=lambda i: sizes[i])
    while pending:
        even = left // len(pending)
        if sizes[pending[0]] <= even:  # short: whole
            i = pending.pop(0)
            left -= sizes[i]
            continue
        for n, i in enumerate(sorted(pending)):  # the rest are all longer than an even share
            out[i] = even + (1 if n < left - even * len(pending) else 0)
        break
    return out


def fit_key(parts: tuple[str, ...], width: int, separator: str, measure: Measure = len) -> str:
    """A series key (product first, then segment values) in at most ``width``, every part keeping a share.

    When the whole key does not fit, each part gets a share of the width (short parts whole, long ones
    evenly) and a long part loses its middle, so two long product names that differ at the end and two
    segments that differ anywhere keep reading differently.  Too narrow for every part: the segments' end.
    """
    full = separator.join(parts)
    if measure(full) <= width:
        return full
    if len(parts) < 2:
        return cut_middle(full, width, measure)
    room = width - measure(separator) * (len(parts) - 1)
    if room >= MIN_PART * len(parts):
        given = shares([measure(part) for part in parts], room)
        return separator.join(cut_middle(part, n, measure) for part, n in zip(parts, given))
    return ELLIPSIS + last(separator.join(parts[1:]), width - 1, measure)
