"""Text from users' files, made safe to print: no control characters reach the terminal.

Emoji sequences stay whole (the zero-width joiner and the tag characters of flag sequences are
kept; variation selectors are printable already).  Bidirectional controls are replaced by a
visible placeholder: left in, they reorder what follows them, so one name could be shown as
another.
"""
from __future__ import annotations

PLACEHOLDER = "?"  # stands for every character removed, so the analyst sees that something was there
BIDI_CONTROLS = frozenset(
    [chr(c) for c in range(0x202A, 0x202F)]    # LRE, RLE, PDF, LRO, RLO
    + [chr(c) for c in range(0x2066, 0x206A)]  # LRI, RLI, FSI, PDI
    + ["\u200e", "\u200f", "\u061c"])          # LRM, RLM, ALM
KEPT_FORMAT = frozenset(["\u200d"] + [chr(c) for c in range(0xE0020, 0xE0080)])  # ZWJ; emoji tag characters


def clean(text: str) -> str:
    """Replace every non-printable character (ESC, CR, BEL, bidi controls, …) with '?'; keep all printable
    text and the joiners of emoji sequences."""
    if text.isprintable():  # the usual case, checked in C
        return text
    return "".join(PLACEHOLDER if ch in BIDI_CONTROLS or not (ch.isprintable() or ch in KEPT_FORMAT) else ch
                   for ch in text)
