"""``clean``: what reaches the screen from users' files.  Characters are named by their Unicode names
(looked up in the Unicode Character Database through ``unicodedata``), not typed in."""
from __future__ import annotations

from unicodedata import lookup

import pytest

from fitcore.text import clean

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
def test_bidi_controls_become_a_visible_placeholder(name):
    control = lookup(name)
    shown = clean(f"salt 1 kg{control}gk 1 tlas")
    assert control not in shown
    assert shown == "salt 1 kg?gk 1 tlas"  # the rest is untouched, in its order


def test_a_reversal_cannot_make_one_name_look_like_another():
    # RLO reverses what follows on screen: "cod 1 kg" + RLO + "gk 5" would read as "cod 1 kg5 kg"
    spoof = "cod 1 kg" + lookup("RIGHT-TO-LEFT OVERRIDE") + "gk 5"
    assert clean(spoof) == "cod 1 kg?gk 5"


@pytest.mark.parametrize("name", ["ESCAPE", "ALERT", "CARRIAGE RETURN", "LINE FEED", "NULL"])  # formal aliases
def test_terminal_controls_still_replaced(name):
    assert clean(f"a{lookup(name)}b") == "a?b"
