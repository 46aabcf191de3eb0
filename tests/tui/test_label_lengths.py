"""The list's key column is as wide as the longest label as shown (``tui.cells.longest_label``): checked
against every label made one by one, each part ``fitcore.text.clean``'s form ``revealed`` (as beside a part
that reads the same: a decomposed name by its marks' code points, a space at an end as ``⟨U+0020⟩``),
measured by rich's ``cell_len`` (the screen's own measure), the reference here."""
from __future__ import annotations

import pyarrow as pa
import pytest
from rich.cells import cell_len

from fitcore.data.keys import SEPARATOR
from fitcore.text import clean, revealed
from tui.cells import longest_label


def reference(columns) -> int:
    rows = zip(*[(c.combine_chunks() if isinstance(c, pa.ChunkedArray) else c).to_pylist() for c in columns])
    return max((cell_len(SEPARATOR.join(revealed(clean(part)) for part in row)) for row in rows if None not in row),
               default=0)


WORDS = ["item-1", "Crème brûlée 200 g", "", "咖啡豆 1kg", "🍋 lemon", "naïve", "x" * 41, "e\u0301tagère", None,
         "East ", " ", "हिन्दी"]


@pytest.mark.parametrize("values", [
    ["item-1", "item-22", "item-333"],  # all ASCII
    ["a", "Crème brûlée 200 g"],  # a longer byte count than characters: 18 characters, 20 bytes
    ["咖啡豆 1kg", "abcdefgh"],  # 7 characters in 13 bytes: the ASCII one is longer in characters
    ["🍋🍋🍋🍋", "abcde"],  # 4 characters in 16 bytes
    ["naïve", None, "ab"],  # a null
    ["East ", " East", "abcdefghijkl"],  # a space at an end: 'East⟨U+0020⟩' (12 cells)
    ["cafe\u0301", "abcdefghijk"],  # decomposed: 'cafe⟨U+0301⟩' (12 cells)
    ["", ""],
    WORDS,
])
def test_one_key_column_as_pyarrow_counts(values):
    column = pa.array(values, pa.string())
    assert longest_label([column]) == reference([column])


def test_joined_parts_as_pyarrow_counts_with_nulls_skipped():
    product = pa.array(["x" * 41, "Crème brûlée 200 g", "咖啡豆 1kg", "🍋 lemon"], pa.string())
    region = pa.array([None, "e\u0301tagère", "north", ""], pa.string())
    # the longest product sits beside a null region: that row makes no label; then 18 + 3 + 15 cells (the
    # combining accent shown by its code point, as beside the composed name)
    assert longest_label([product, region]) == reference([product, region]) == 36
    product = pa.array(WORDS, pa.string())
    region = pa.array(list(reversed(WORDS)), pa.string())
    assert longest_label([product, region]) == reference([product, region])


def test_slices_and_large_strings_and_chunks():
    column = pa.array(WORDS * 3, pa.string())
    for part in (column.slice(1, 5), column.slice(7, 10), column.slice(6, 1)):
        assert longest_label([part]) == reference([part])
        large = part.cast(pa.large_string())
        assert longest_label([large]) == reference([large])
    chunked = pa.chunked_array([column.slice(0, 4), column.slice(9, 3)])
    assert longest_label([chunked]) == reference([chunked.combine_chunks()])


def test_nothing_and_only_nulls():
    assert longest_label([pa.array([], pa.string())]) == 0
    assert longest_label([pa.array([None, None], pa.string())]) == reference([pa.array([None, None], pa.string())])


def test_cells_as_shown_not_characters():
    """A label is as wide as it shows: an escape form takes eight cells for one character, a CJK character two,
    a control character its one-cell picture (the list sized them by characters and cut them)."""
    escaped = pa.array(["ab\u202ecd", "xyz"], pa.string())  # shows "ab⟨U+202E⟩cd"
    assert longest_label([escaped]) == reference([escaped]) == 12
    wide = pa.array(["咖啡豆咖啡豆", "abcdefghi"], pa.string())
    assert longest_label([wide]) == reference([wide]) == 12
    control = pa.array(["a\nb", "ab"], pa.string())
    assert longest_label([control]) == reference([control]) == 3
    many = pa.array(["\u202e" * 30, "short"], pa.string())
    assert longest_label([many], cap=40) == 40 and reference([many]) == 240


@pytest.mark.parametrize("values", [
    ["Käse 1", "Süd-Ost Großhandel", "x"],
    ["\u00ad soft hyphen", "\u0085next line", "a\u0378b"],  # 2-byte characters that do not print: escaped
    ["👨\u200d👩\u200d👧 family", "🏴\U000e0067\U000e0062\U000e0065\U000e006e\U000e0067\U000e007f flag",
     "a\u200db", "❤\ufe0f heart"],  # joiners, tags, a selector: measured whole
    ["\U0001f34b\u0301", "𝔘𝔫𝔦𝔠𝔬𝔡𝔢", "\ud7b0\u11a8"],
])
def test_every_kind_of_character_as_shown(values):
    column = pa.array(values, pa.string())
    assert longest_label([column]) == reference([column])
    other = pa.array(list(reversed(values)), pa.string())
    assert longest_label([column, other]) == reference([column, other])


def test_random_names_one_by_one():
    import random
    pool = ["a", "Z", " ", "\n", "\x7f", "é", "e\u0301", "\u00a0", "咖", "🍋", "\u202e", "⟨", "␊", "\u200d",
            "\ufe0f", "\U000e0067", "🏴", "ß", "\u0600", "\uffff", "\U0010fffd"]
    rng = random.Random(7)
    for _ in range(400):
        value = "".join(rng.choice(pool) for _ in range(rng.randint(0, 12)))
        column = pa.array([value], pa.string())
        assert longest_label([column]) == reference([column]), repr(value)
