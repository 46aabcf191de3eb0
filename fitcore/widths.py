"""Text fitted to a width: cut at the end or in the middle, and series keys whose parts share a width.

Pure and UI-free, so the triage list (``tui.cells``, measuring terminal cells with the screen's own
measure) and ``pricefold show`` (``cells`` here) cut keys by the one rule: rows of different series
read differently (``distinct_keys``).  ``measure`` gives a string's width; every function cuts at
character boundaries and never inside a shown escape form (``⟨U+202E⟩``, ``fitcore.text.clean``).
"""
from __future__ import annotations

import os.path
import unicodedata
from collections import defaultdict
from collections.abc import Callable

from .text import CLOSE, ESCAPE, OPEN, reads, told_apart

ELLIPSIS = "…"
MIN_PART = 4  # width a key part keeps at least ("ab…z"); below that a key shows its segments' ends

Measure = Callable[[str], int]
CONTEXT = 2  # characters kept before the first difference when a key is cut to show it
ROUNDS = 8  # re-cuts of clashing keys before the last resort (a few: each round shows a later difference)


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
    kept = "".join(out)
    return kept[:_escape_open(text, len(kept))] + ELLIPSIS


def _escape_open(text: str, end: int) -> int:
    """Where ``text[:end]`` must end not to cut an escape form: ``end``, or the start of the form it cuts."""
    start = text.rfind(OPEN, max(end - 10, 0), end)
    if start >= 0 and CLOSE not in text[start:end] and ESCAPE.match(text, start):
        return start
    return end


def last(text: str, width: int, measure: Measure = len) -> str:
    """The end of ``text`` in at most ``width``, without leading spaces."""
    out, used = [], 0
    for ch in reversed(text):
        size = measure(ch)
        if used + size > width:
            break
        out.append(ch)
        used += size
    start = len(text) - len(out)
    if _escape_open(text, start) < start:  # the tail would start inside an escape form: from the form's end
        start = text.index(CLOSE, start) + 1
    return text[start:].lstrip()


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
    segments that differ anywhere usually keep reading differently (``distinct_keys`` makes sure among
    the keys shown together).  Too narrow for every part: the segments' end.
    """
    return _cut_key(parts, width, separator, measure, None)


def _cut_key(parts: tuple[str, ...], width: int, separator: str, measure: Measure,
             at: tuple[int | None, ...] | None) -> str:
    """``fit_key``; ``at``: per part, a character to keep in view (None: the part is cut in its middle)."""
    full = separator.join(parts)
    if measure(full) <= width:
        return full
    room = width - measure(separator) * (len(parts) - 1)
    if len(parts) < 2 or room < MIN_PART * len(parts):  # one piece of text
        first = None if at is None else next((_at_in_joined(parts, j, a, separator) for j, a in enumerate(at)
                                              if a is not None), None)
        if first is not None:
            return cut_showing(full, width, first, measure)
        return cut_middle(full, width, measure) if len(parts) < 2 else ELLIPSIS + last(
            separator.join(parts[1:]), width - 1, measure)
    given = shares([measure(part) for part in parts], room)
    at = at or (None,) * len(parts)
    return separator.join(cut_middle(part, n, measure) if a is None else cut_showing(part, n, a, measure)
                          for part, n, a in zip(parts, given, at))


def _at_in_joined(parts: tuple[str, ...], j: int, a: int, separator: str) -> int:
    return sum(len(part) + len(separator) for part in parts[:j]) + a


def cut_showing(text: str, width: int, at: int, measure: Measure = len) -> str:
    """``text`` in at most ``width`` with the character at index ``at`` (where it differs from a text it
    would otherwise read as) in view: its head when ``at`` is there, its end when ``at`` is there, else a
    short head, '…', the text from just before ``at``, '…'."""
    if measure(text) <= width:
        return text
    if width <= 2:
        return cut_end(text, width, measure)
    at = _escape_open(text, min(at, len(text)))  # a difference inside an escape form: show the whole form
    form = ESCAPE.match(text, at)
    if measure(text[:form.end() if form else at + 1]) <= width - 1:
        return cut_end(text, width, measure)
    tail = last(text, width - 1, measure)
    if len(text) - len(tail) <= at:
        return ELLIPSIS + tail
    head = cut_end(text, max((width - 2) // 3, 1) + 1, measure).rstrip(ELLIPSIS) if width >= 6 else ""
    window = width - measure(head) - 1
    start = _escape_open(text, max(at - max(min(CONTEXT, window - 3), 0), len(head)))
    return head + ELLIPSIS + cut_end(text[start:], window, measure)


def distinct_keys(keys: list[tuple[str, ...]], width: int, separator: str, measure: Measure = len) -> list[str]:
    """``fit_key`` of each of ``keys`` (shown forms, ``fitcore.text.clean``), keys of different series never
    reading the same: a part that reads like a part of another key shown with it though it differs (``café``
    decomposed in East beside ``café`` composed in North, ``East `` beside ``East``) is shown ``revealed``
    (``fitcore.text.told_apart``), its first revealed character kept in view; where two cut keys read alike
    (``fitcore.text.reads``), each part in which they differ is cut again to show where it differs (its first
    different character, after its group's common start), again on a later difference while some still
    clash.  Too narrow to show every difference (a key of several parts that differ, in a dozen cells), each
    ends in a number (``#2``).  Costs a ``fit_key``, a set of the parts and a dictionary look-up a key where
    nothing clashes.
    """
    shown = told_apart(keys)
    kept: list[tuple] = [(None,) * len(key) if new is key else  # per key and part, the difference kept in view
                         tuple(None if a == b else len(os.path.commonprefix([a, b])) for a, b in zip(new, key))
                         for new, key in zip(shown, keys)]
    labels = [fit_key(key, width, separator, measure) if new is key else _cut_key(new, width, separator, measure, at)
              for new, key, at in zip(shown, keys, kept)]
    for attempt in range(ROUNDS + 1):
        clashing = _clashing(labels, keys)
        if not clashing:
            break
        if attempt == ROUNDS:  # too narrow to show every difference: the last resort, a number each
            numbers = {key: n for n, key in enumerate(sorted({keys[i] for g in clashing for i in g}), 1)}
            for i in (i for g in clashing for i in g):
                labels[i] = _numbered(labels[i], numbers[keys[i]], width, measure)
            break
        for group in clashing:
            at = _differences([shown[i] for i in group])
            for i in group:  # a difference shown in an earlier round stays in view where this group's parts agree
                kept[i] = tuple(new if new is not None else old for new, old in zip(at, kept[i]))
                labels[i] = _cut_key(shown[i], width, separator, measure, kept[i])
    return labels


def _clashing(labels: list[str], keys: list[tuple[str, ...]]) -> list[list[int]]:
    """Groups of positions whose labels read alike though their keys differ."""
    groups: dict[str, list[int]] = defaultdict(list)
    for i, label in enumerate(labels):
        groups[reads(label)].append(i)
    return [g for g in groups.values() if len(g) > 1 and len({keys[i] for i in g}) > 1]


def _numbered(label: str, n: int, width: int, measure: Measure) -> str:
    """``label`` ending in '#n' within ``width``."""
    tag = f"#{n}"
    return (label if measure(label) + len(tag) <= width else cut_end(label, width - len(tag), measure)) + tag


def _differences(keys: list[tuple[str, ...]]) -> tuple[int | None, ...]:
    """Per part of ``keys`` (which read alike cut), where they first differ (their common start's length),
    None where they agree."""
    at: list[int | None] = []
    for j in range(len(keys[0])):
        values = {key[j] for key in keys}
        at.append(None if len(values) == 1 else len(os.path.commonprefix(list(values))))
    return tuple(at)
