"""Text from users' files, made safe to print: no control characters reach the terminal, and two different
texts never print the same.

Every character that does not print is shown by a visible form of its own, so that series whose names
differ only there stay apart on screen: a C0 control or DEL as its control picture (line feed ``␊``, tab
``␉``, escape ``␛``, DEL ``␡``), anything else — C1 controls, bidirectional controls (left in, they reorder
what follows them, so one name could be shown as another), other format characters, separators, unassigned
code points — as ``⟨U+202E⟩``.  The forms are kept unambiguous: a control picture or a ``⟨`` already in
the text is escaped the same way (``⟨U+240A⟩``), so every shown text reads back to exactly one original.
Emoji sequences stay whole (the zero-width joiner between two pictographs and the tag characters after a
black flag are kept, and escaped elsewhere, where they are invisible; variation selectors are printable).

Two texts that differ only in Unicode normalisation (``café`` with a composed ``é`` and with ``e`` and a
combining accent) or in spaces at their ends (``East `` and ``East``) print alike (``reads``); where two such
names are shown together (``told_apart``), the one not in NFC form shows what NFC would change by code point
(``cafe⟨U+0301⟩``, ``reveal_unnormalised``) and a space at an end is shown the same way (``East⟨U+0020⟩``).

A message put together from texts ``clean`` has shown already (an error naming a series, a ledger sentence)
goes through ``printable`` at the edge instead: it shows what does not print as ``clean`` does and leaves the
rest, the shown forms included, as it is (``clean`` again would escape the pictures it made).
"""
from __future__ import annotations

import re
from collections.abc import Iterable, Sequence
from unicodedata import category, combining, is_normalized, normalize

OPEN, CLOSE = "\u27e8", "\u27e9"  # ⟨ ⟩ MATHEMATICAL ANGLE BRACKETS: one cell each, rare in names
PICTURES = {chr(c): chr(0x2400 + c) for c in range(0x20)} | {"\x7f": "\u2421"}  # ␀ … ␟, ␡
ZWJ, VS16, BLACK_FLAG = "\u200d", "\ufe0f", "\U0001f3f4"
TAGS = frozenset(chr(c) for c in range(0xE0020, 0xE0080))  # a subdivision flag's letters and its end
RESERVED = frozenset(PICTURES.values()) | {OPEN}  # printable, but the shown forms: escaped when in the text
_RESERVED = re.compile(f"[{re.escape(''.join(sorted(RESERVED)))}]")
ESCAPE = re.compile(f"{OPEN}U\\+[0-9A-F]{{4,6}}{CLOSE}")  # ``escaped``'s form, as ``clean`` writes it


def escaped(ch: str) -> str:
    """'⟨U+202E⟩': a character by its code point."""
    return f"{OPEN}U+{ord(ch):04X}{CLOSE}"


def clean(text: str) -> str:
    """``text`` safe to print, distinct texts staying distinct: each C0 control and DEL as its control picture,
    every other character that does not print (and a control picture or ``⟨`` already there) as ``⟨U+XXXX⟩``;
    all other printable text and the joiners and tags of emoji sequences as they are."""
    if text.isprintable() and (text.isascii() or _RESERVED.search(text) is None):  # the usual case, in C
        return text
    return _shown(text, RESERVED)


def unstable(ch: str) -> bool:
    """Whether NFC may change ``ch`` in a text: a combining mark, a conjoining jamo, a character NFC replaces."""
    return (combining(ch) > 0 or category(ch).startswith("M") or normalize("NFC", ch) != ch
            or "\u1100" <= ch <= "\u11ff" or "\ua960" <= ch <= "\ua97f" or "\ud7b0" <= ch <= "\ud7ff")


def reveal_unnormalised(shown: str) -> str:
    """A shown text (``clean``'s) that is not in NFC form with each character NFC would change — combining
    marks, conjoining jamo, characters NFC replaces — as ``⟨U+XXXX⟩``, so that it no longer reads as its NFC
    twin; a text in NFC form as it is."""
    if shown.isascii() or is_normalized("NFC", shown):
        return shown
    return "".join(escaped(ch) if unstable(ch) else ch for ch in shown)


def reads(text: str) -> str:
    """What a shown text reads as: its NFC form (a decomposed 'é' looks as the composed one) without the spaces
    at its ends (which do not show at the end of a line, or before padding)."""
    return (text if text.isascii() else normalize("NFC", text)).strip(" ")


def revealed(shown: str) -> str:
    """A shown text as it is shown beside another that reads the same (``reads``): not in NFC form, with what
    NFC would change as ``⟨U+XXXX⟩`` (``reveal_unnormalised``); each space at its ends as ``⟨U+0020⟩``."""
    text = reveal_unnormalised(shown)
    core = text.strip(" ")
    if len(core) == len(text):
        return text
    lead = len(text) - len(text.lstrip(" "))
    return _SPACE * lead + core + _SPACE * (len(text) - len(core) - lead)


_SPACE = escaped(" ")


def told_apart(keys: Sequence[tuple[str, ...]], beside: Iterable[tuple[str, ...]] = ()) -> list[tuple[str, ...]]:
    """``keys`` (tuples of shown texts, ``clean``'s) shown together, each value that reads like another value
    among them (``reads``) but differs from it shown ``revealed``, whichever parts of which keys they are
    (``café`` decomposed in East beside ``café`` composed in North); the rest as they are.  ``beside``: keys
    not shown here that the words around name (a missing note's ledger series): each value of ``keys`` that
    reads like one of theirs is told apart from it too.  Costs a set of the values where no value is
    unnormalised or has a space at an end."""
    values = {value for key in keys for value in key}
    odd = [value for value in values if not _plain(value) and revealed(value) != value]
    if not odd:
        return list(keys)
    spellings: dict[str, set] = {}
    for value in values.union(*beside):
        spellings.setdefault(reads(value), set()).add(value)
    shown = {value: revealed(value) for value in odd if len(spellings[reads(value)]) > 1}
    return [tuple(shown.get(value, value) for value in key) for key in keys] if shown else list(keys)


def told_apart_from(beside: Iterable[tuple[str, ...]]):
    """``told_apart`` of one key at a time (a list's row, a title, a notification's words) beside the same many keys
    (``beside``: a missing note's), their values indexed once by what they read as: a key costs a look-up a value,
    not a pass over ``beside``.  Returns that function, key → key as shown."""
    by_reads: dict[str, set[str]] = {}
    for key in beside:
        for value in key:
            by_reads.setdefault(reads(value), set()).add(value)

    def shown(key: tuple[str, ...]) -> tuple[str, ...]:
        near = [tuple(by_reads[read]) for read in map(reads, key) if read in by_reads]
        return told_apart([key], near)[0] if near else key
    return shown


def _plain(text: str) -> bool:
    """ASCII without a space at either end: shown as it is beside any other text."""
    return text.isascii() and text[:1] != " " and text[-1:] != " "


_SHOWN = re.compile(f"{OPEN}[Uu]\\+([0-9A-Fa-f]{{4,6}}){CLOSE}|[{''.join(sorted(PICTURES.values()))}]")
_UNPICTURED = {picture: ch for ch, picture in PICTURES.items()}


def original(shown: str) -> str:
    """The text ``shown`` (what an analyst copies or types from the screen) reads back to: each escape form
    ``⟨U+202E⟩`` and control picture ``␊`` as the character it stands for (``clean`` undone)."""
    if shown.isascii() or _SHOWN.search(shown) is None:
        return shown

    def back(match: re.Match) -> str:
        code = match.group(1)
        if code is None:
            return _UNPICTURED[match.group(0)]
        point = int(code, 16)  # a surrogate or beyond Unicode stands for no character: left as typed
        return chr(point) if point <= 0x10FFFF and not 0xD800 <= point <= 0xDFFF else match.group(0)
    return _SHOWN.sub(back, shown)


class EitherForm:
    """Texts typed to pick values by (``--product``), each matching a value in either Unicode normal form (a composed
    ``crème`` finds the value spelled with ``e`` and a combining accent too, and the other way round) or typed as
    shown (``cre⟨U+0300⟩me``, read back by ``original``), as the screen's search finds text.  ``rank``: 0 for a value
    as typed, 1 for its other form, None for no match — so a list can give the form typed first."""

    def __init__(self, typed: Iterable[str]) -> None:
        self.exact = frozenset(original(str(text)) for text in typed)
        self.normal = frozenset(normalize("NFC", text) for text in self.exact)

    def __len__(self) -> int:
        return len(self.exact)

    def rank(self, value) -> int | None:
        if value in self.exact:
            return 0
        if not isinstance(value, str):
            return None
        return 1 if (value if value.isascii() else normalize("NFC", value)) in self.normal else None

    def __contains__(self, value) -> bool:
        return self.rank(value) is not None


def quoted(text) -> str:
    """``'text'`` as an error message names a user's value: ``clean``'s form between single quotes (a
    ``repr`` would show ``'nosuch\\u202eevil\\n2'``, not what the screen and the rejects file show)."""
    return f"'{clean(str(text))}'"


def loose(value: str) -> str:
    """``value`` as a loose comparison reads it: NFKC, case-folded, white space stripped and collapsed, so that
    ``North``, ``north `` and a full-width ``Ｎorth`` read alike (accents and punctuation stay)."""
    if value.isascii():  # NFKC leaves ASCII as it is, and its case folding is ``lower``
        return " ".join(value.lower().split())
    folded = normalize("NFKC", normalize("NFKC", value).casefold())
    return " ".join(folded.split())


def printable(message: str) -> str:
    """A ``message`` safe to print where parts of it are ``clean``'s shown forms already: each character that
    does not print shown as ``clean`` shows it, everything else as it is (not one-to-one: users' own texts go
    through ``clean``)."""
    if message.isprintable():
        return message
    return _shown(message, frozenset())


def _shown(text: str, reserved: frozenset) -> str:
    """Each character of ``text`` as it is shown (``reserved``: printable ones escaped all the same).  A joiner
    is kept between two pictographs and tag characters after a black flag (emoji sequences); elsewhere they
    are invisible, so "a" + ZWJ + "b" would read as "ab", and are escaped."""
    out, flagged = [], False
    for i, ch in enumerate(text):
        if ch in TAGS:
            out.append(ch if flagged else escaped(ch))  # a run of tags goes on after its flag
            continue
        flagged = ch == BLACK_FLAG
        if ch == ZWJ and _joins(text, i):
            out.append(ch)
        else:
            out.append(PICTURES.get(ch) or (ch if ch.isprintable() and ch not in reserved else escaped(ch)))
    return "".join(out)


def _joins(text: str, i: int) -> bool:
    """Whether the joiner at ``i`` joins two emoji: a pictograph (or an emoji modifier, or the emoji
    presentation selector) before it, a pictograph after it."""
    before, after = text[i - 1:i], text[i + 1:i + 2]
    return bool(before and after) and (before == VS16 or category(before) in ("So", "Sk")) and category(after) == "So"


def same_print(typed: str, found: str) -> bool:
    """Do the two values differ only in Unicode form (they print the same)?"""
    return normalize("NFC", clean(typed)) == normalize("NFC", clean(found))


def hint_for(typed: str, found: str) -> str:
    """``found`` (a value the data or ledger holds) quoted as a "did you mean" hint for ``typed``, which reads
    alike loosely; where the two differ only in Unicode form, ``found`` by code point if it is the one not in NFC
    form, else said to be the composed one (``plan_checks`` shows a typed value not in NFC by code point)."""
    theirs = clean(found)
    if not same_print(typed, found):
        return quoted(found)  # case or spaces: visible between the quotes
    if reveal_unnormalised(theirs) != theirs:
        return f"'{reveal_unnormalised(theirs)}' (another Unicode form)"
    return f"'{theirs}' (composed)"
