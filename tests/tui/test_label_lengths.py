"""The list's key column is as wide as the longest label: characters counted from the Arrow buffers
(``tui.cells.longest_label``), checked against ``pyarrow.compute`` (``utf8_length`` of the labels joined by
``binary_join_element_wise``, as the list counted them before), the reference here."""
from __future__ import annotations

import pyarrow as pa
import pyarrow.compute as pc
import pytest

from fitcore.data.keys import SEPARATOR
from tui.cells import longest_label


def reference(columns) -> int:
    labels = columns[0] if len(columns) == 1 else pc.binary_join_element_wise(*columns, SEPARATOR)
    return int(pc.max(pc.utf8_length(labels)).as_py() or 0)


WORDS = ["item-1", "Crème brûlée 200 g", "", "咖啡豆 1kg", "🍋 lemon", "naïve", "x" * 41, "e\u0301tagère", None]


@pytest.mark.parametrize("values", [
    ["item-1", "item-22", "item-333"],  # all ASCII
    ["a", "Crème brûlée 200 g"],  # a longer byte count than characters: 18 characters, 20 bytes
    ["咖啡豆 1kg", "abcdefgh"],  # 7 characters in 13 bytes: the ASCII one is longer in characters
    ["🍋🍋🍋🍋", "abcde"],  # 4 characters in 16 bytes
    ["naïve", None, "ab"],  # a null
    ["", ""],
    WORDS,
])
def test_one_key_column_as_pyarrow_counts(values):
    column = pa.array(values, pa.string())
    assert longest_label([column]) == reference([column])


def test_joined_parts_as_pyarrow_counts_with_nulls_skipped():
    product = pa.array(["x" * 41, "Crème brûlée 200 g", "咖啡豆 1kg", "🍋 lemon"], pa.string())
    region = pa.array([None, "e\u0301tagère", "north", ""], pa.string())
    # the longest product sits beside a null region: that row makes no label; then 18 + 3 + 8 characters
    assert longest_label([product, region]) == reference([product, region]) == 29
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
