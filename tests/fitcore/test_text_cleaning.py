"""``clean``: what reaches the screen from users' files.  Characters are named by their Unicode names
(looked up in the Unicode Character Database through ``unicodedata``), not typed in; the control pictures
are the Unicode block "Control Pictures" (U+2400–U+243F), named there "SYMBOL FOR …"."""
from __future__ import annotations

import random
import re
from unicodedata import lookup

import pytest

from fitcore.text import clean, printable

ZWJ = lookup("ZERO WIDTH JOINER")
VS16 = lookup("VARIATION SELECTOR-16")
WOMAN, GIRL, HEART = lookup("WOMAN"), lookup("GIRL"), lookup("HEAVY BLACK HEART")
FLAG = lookup("WAVING BLACK FLAG")
TAGS = "".join(lookup(f"TAG LATIN SMALL LETTER {c}") for c in "gbsct") + lookup("CANCEL TAG")

BIDI = ["LEFT-TO-RIGHT EMBEDDING", "RIGHT-TO-LEFT EMBEDDING", "POP DIRECTIONAL FORMATTING",
        "LEFT-TO-RIGHT OVERRIDE", "RIGHT-TO-LEFT OVERRIDE", "LEFT-TO-RIGHT ISOLATE", "RIGHT-TO-LEFT ISOLATE",
        "FIRST STRONG ISOLATE", "POP DIRECTIONAL ISOLATE", "LEFT-TO-RIGHT MARK", "RIGHT-TO-LEFT MARK",
        "ARABIC LETTER MARK"]


@pytest.mark.parametrize("sequence", [
    WOMAN + ZWJ + WOMAN + ZWJ + GIRL,  # a family: joined emoji
    HEART + VS16,  # emoji presentation of a text symbol
    FLAG + TAGS,  # a subdivision flag: tag characters after the black flag
])
def test_emoji_sequences_stay_whole(sequence):
    name = f"gift box {sequence} large"
    assert clean(name) == name


@pytest.mark.parametrize("name", BIDI)
def test_bidi_controls_become_a_visible_escape(name):
    control = lookup(name)
    shown = clean(f"salt 1 kg{control}gk 1 tlas")
    assert control not in shown
    assert shown == f"salt 1 kg\u27e8U+{ord(control):04X}\u27e9gk 1 tlas"  # the rest is untouched, in its order


def test_a_reversal_cannot_make_one_name_look_like_another():
    # RLO reverses what follows on screen: "cod 1 kg" + RLO + "gk 5" would read as "cod 1 kg5 kg"
    spoof = "cod 1 kg" + lookup("RIGHT-TO-LEFT OVERRIDE") + "gk 5"
    assert clean(spoof) == "cod 1 kg\u27e8U+202E\u27e9gk 5"


@pytest.mark.parametrize("name, picture", [  # formal aliases of the controls, and their pictures
    ("ESCAPE", "SYMBOL FOR ESCAPE"), ("ALERT", "SYMBOL FOR BELL"), ("CARRIAGE RETURN", "SYMBOL FOR CARRIAGE RETURN"),
    ("LINE FEED", "SYMBOL FOR LINE FEED"), ("NULL", "SYMBOL FOR NULL"), ("CHARACTER TABULATION", "SYMBOL FOR "
     "HORIZONTAL TABULATION"), ("UNIT SEPARATOR", "SYMBOL FOR UNIT SEPARATOR"), ("DELETE", "SYMBOL FOR DELETE")])
def test_terminal_controls_show_as_their_control_pictures(name, picture):
    assert clean(f"a{lookup(name)}b") == f"a{lookup(picture)}b"


def test_c1_controls_show_as_an_escape():
    csi = lookup("CONTROL SEQUENCE INTRODUCER")  # U+009B: some terminals start an escape sequence at it
    assert clean(f"a{csi}2Jb") == "a\u27e8U+009B\u27e92Jb"


@pytest.mark.parametrize("a, b", [
    ("line\nbreak", "line?break"), ("tab\there", "tab?here"),  # the placeholder '?' made these one
    ("line\nbreak", "line\u240abreak"),  # a control picture already in the text
    ("a\u202eb", "a\u27e8U+202E\u27e9b"),  # the escape's own form already in the text
    ("cod\u00a01 kg", "cod 1 kg"),  # a no-break space is not a space
])
def test_different_texts_are_shown_differently(a, b):
    assert clean(a) != clean(b) and clean(a).isprintable() and clean(b).isprintable()


@pytest.mark.parametrize("text, plain, shown", [
    ("a" + ZWJ + "b", "ab", "a\u27e8U+200D\u27e9b"),  # invisible between letters
    ("salt" + TAGS, "salt", "salt" + "".join(f"\u27e8U+{ord(c):05X}\u27e9" for c in TAGS)),  # tags without a flag
])
def test_joiners_and_tags_outside_emoji_are_shown(text, plain, shown):
    assert clean(text) == shown != clean(plain)


def unclean(shown: str) -> str:
    """The text ``clean`` was given, read back from what it showed (the inverse the test holds it to)."""
    pictures = {chr(0x2400 + c): chr(c) for c in range(0x20)} | {lookup("SYMBOL FOR DELETE"): "\x7f"}
    return re.sub("\u27e8U\\+([0-9A-F]{4,6})\u27e9|(.)", lambda m: chr(int(m[1], 16)) if m[1] else
                  pictures.get(m[2], m[2]), shown, flags=re.S)


def test_every_shown_text_reads_back_to_one_text():
    """Random texts drawn from the characters that matter (controls, their pictures, the escape's brackets,
    bidi and format characters, '?', letters): what is shown always reads back to the text given."""
    alphabet = ([chr(c) for c in range(0x20)] + ["\x7f", "\x85", "\x9b", "\u00a0", "\u2028", "\u200b"]
                + [chr(c) for c in range(0x2400, 0x2427)] + ["\u27e8", "\u27e9", "U", "+", "0", "A", "?", " ", "x"]
                + [lookup(name) for name in BIDI] + [ZWJ, VS16, WOMAN, FLAG, TAGS[0], TAGS[-1]])
    rng = random.Random(0)
    for _ in range(3000):
        text = "".join(rng.choice(alphabet) for _ in range(rng.randint(0, 8)))
        shown = clean(text)
        assert unclean(shown) == text, (text, shown)
        assert all(c.isprintable() or c == ZWJ or c in TAGS for c in shown)  # emoji sequences' own, kept


def test_a_message_holding_shown_names_is_printed_as_it_is():
    """``printable``, for messages put together from names ``clean`` has shown: those stay as shown (``clean``
    again would write the line feed's picture as ⟨U+240A⟩), and a control character still does not pass."""
    name = clean("line\nbreak")
    said = f"{name}: already accepted on this data"
    assert printable(said) == said == "line\u240abreak: already accepted on this data"
    assert clean(said) != said
    assert printable("ana\x1b[2J accepted \u202epoly1") == "ana\u241b[2J accepted \u27e8U+202E\u27e9poly1"
