"""Text from users' files, made safe to print: no control characters reach the terminal, and two different
texts never print the same.

Every character that does not print is shown by a visible form of its own, so that series whose names
differ only there stay apart on screen: a C0 control or DEL as its control picture (line feed ``␊``, tab
``␉``, escape ``␛``, DEL ``␡``), anything else — C1 controls, bidirectional controls (left in, they reorder
what follows them, so one name could be shown as another), other format characters, separators, unassigned
code points — as ``⟨U+202E⟩``.  The forms are kept unambiguous: a control picture or a ``⟨`` already in
the text is escaped the same way (``⟨U+240A⟩``), so every shown text reads back to exactly one original.
Emoji sequences stay whole (the zero-width joiner and the tag characters of flag sequences are kept;
variation selectors are printable already).

A message put together from texts ``clean`` has shown already (an error naming a series, a ledger sentence)
goes through ``printable`` at the edge instead: it shows what does not print as ``clean`` does and leaves the
rest, the shown forms included, as it is (``clean`` again would escape the pictures it made).
"""
from __future__ import annotations

import re

OPEN, CLOSE = "\u27e8", "\u27e9"  # ⟨ ⟩ MATHEMATICAL ANGLE BRACKETS: one cell each, rare in names
PICTURES = {chr(c): chr(0x2400 + c) for c in range(0x20)} | {"\x7f": "\u2421"}  # ␀ … ␟, ␡
KEPT_FORMAT = frozenset(["\u200d"] + [chr(c) for c in range(0xE0020, 0xE0080)])  # ZWJ; emoji tag characters
RESERVED = frozenset(PICTURES.values()) | {OPEN}  # printable, but the shown forms: escaped when in the text
_RESERVED = re.compile(f"[{re.escape(''.join(sorted(RESERVED)))}]")


def escaped(ch: str) -> str:
    """'⟨U+202E⟩': a character by its code point."""
    return f"{OPEN}U+{ord(ch):04X}{CLOSE}"


def clean(text: str) -> str:
    """``text`` safe to print, distinct texts staying distinct: each C0 control and DEL as its control picture,
    every other character that does not print (and a control picture or ``⟨`` already there) as ``⟨U+XXXX⟩``;
    all other printable text and the joiners of emoji sequences as they are."""
    if text.isprintable() and (text.isascii() or _RESERVED.search(text) is None):  # the usual case, in C
        return text
    return "".join(PICTURES.get(ch) or (ch if (ch.isprintable() and ch not in RESERVED) or ch in KEPT_FORMAT
                                        else escaped(ch)) for ch in text)


def printable(message: str) -> str:
    """A ``message`` safe to print where parts of it are ``clean``'s shown forms already: each character that
    does not print shown as ``clean`` shows it, everything else as it is (not one-to-one: users' own texts go
    through ``clean``)."""
    if message.isprintable():
        return message
    return "".join(PICTURES.get(ch) or (ch if ch.isprintable() or ch in KEPT_FORMAT else escaped(ch))
                   for ch in message)
