"""Arrow arrays made from their buffers (``fitcore.arrays``) against pyarrow's own ``pa.array`` of the same values
(the reference: what the results' columns were made by before), type, nulls and values alike."""
from __future__ import annotations

import numpy as np
import pyarrow as pa
import pytest

from fitcore.arrays import from_numpy, repeated, text, texts

RNG = np.random.default_rng(7)
NUMBERS = {
    "float64": np.where(RNG.random(21) < 0.3, np.nan, RNG.normal(size=21)),
    "float32": RNG.normal(size=9).astype(np.float32),
    "int64": RNG.integers(-5, 5, 13),
    "int32": RNG.integers(-5, 5, 17).astype(np.int32),
    "bool": RNG.random(19) < 0.5,  # not a whole number of bytes: the last byte's bits
    "empty": np.zeros(0),
}


def same(ours: pa.Array, reference: pa.Array) -> bool:
    """Same type, nulls and values (NaN equal to NaN: compared as written)."""
    return (ours.type == reference.type and ours.null_count == reference.null_count
            and repr(ours.to_pylist()) == repr(reference.to_pylist()))


@pytest.mark.parametrize("name", NUMBERS)
def test_numbers_as_pa_array_makes_them(name):
    values = NUMBERS[name]
    mask = RNG.random(len(values)) < 0.25
    assert same(from_numpy(values), pa.array(values))
    assert same(from_numpy(values, mask=mask), pa.array(values, mask=mask))
    assert same(from_numpy(values, nan_is_null=True), pa.array(values, from_pandas=True))


def test_a_strided_array_is_copied_not_misread():
    values = np.arange(20.0)[::3]
    assert from_numpy(values).to_pylist() == values.tolist()


@pytest.mark.parametrize("values", [
    ["a", "bc", "", "def"],
    ["süd", None, "咖啡", "", "🍋x"],  # not ASCII: encoded text by text
    [None, None],
    [],
    np.array(["12", "3,456.7"]),  # numpy's own text
    np.array(["x", None, "y"], dtype=object),
])
def test_texts_as_pa_array_makes_them(values):
    reference = pa.array(values, pa.string())
    assert same(texts(values), reference)
    mask = np.arange(len(values)) % 2 == 1
    assert same(texts(values, mask=mask), pa.array([None if m else v for v, m in zip(list(values), mask)], pa.string()))


def test_constant_texts():
    assert repeated("[]", 3).to_pylist() == ["[]"] * 3 and repeated("{}", 0).to_pylist() == []
    assert text("é}") == pa.scalar("é}", pa.string())
