"""The series' key hashes (they seed each series' fold shuffle) computed with numpy, all texts at once, are
pandas' ``hash_pandas_object`` of the key columns, and a fit's hashes import no pandas.

References: SipHash-2-4 test vectors of Aumasson and Bernstein (the SipHash paper, appendix A, and the
reference implementation's ``vectors.h``: key 00 01 … 0f, message 00 01 … of each length); pandas'
``hash_pandas_object`` (``index=False``) for the mixing and the combination of columns."""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from fitcore.data.dataset import FEW_ROWS, hash_keys
from fitcore.data.key_hashes import BATCH, pandas_hashes, siphash24_bytes

ROOT = Path(__file__).resolve().parents[2]
KEY = bytes(range(16))
# vectors.h (vectors_sip64), little-endian words, messages bytes(range(length)); 15 bytes: the paper's appendix A
VECTORS = {0: 0x726FDB47DD0E0E31, 1: 0x74F839C593DC67FD, 15: 0xA129CA6149BE45E5}
ALPHABET = list("abcXYZ 0123-_.,éüß咖啡🍋\t") + [""]


@pytest.mark.parametrize("length", sorted(VECTORS))
def test_siphash_published_vectors(length):
    message = np.frombuffer(bytes(range(length)), np.uint8) if length else np.empty(0, np.uint8)
    assert int(siphash24_bytes(message, np.array([0, length]), KEY)[0]) == VECTORS[length]


def test_siphash_of_messages_side_by_side_is_each_alone():
    """Messages of every length 0–40 in one buffer (whole blocks and tails, texts ending at different
    blocks) hash as each does alone; the 15-byte one is the paper's."""
    messages = [bytes(range(length)) for length in range(41)]
    offsets = np.concatenate([[0], np.cumsum([len(m) for m in messages])])
    together = siphash24_bytes(np.frombuffer(b"".join(messages), np.uint8), offsets, KEY)
    alone = [int(siphash24_bytes(np.frombuffer(m, np.uint8) if m else np.empty(0, np.uint8),
                                 np.array([0, len(m)]), KEY)[0]) for m in messages]
    assert together.tolist() == alone
    assert alone[15] == VECTORS[15] and alone[0] == VECTORS[0]


def random_texts(rng, n: int, longest: int = 40) -> np.ndarray:
    return np.array(["".join(rng.choice(ALPHABET, rng.integers(0, longest))) for _ in range(n)], dtype=object)


@pytest.mark.parametrize("n_columns", [1, 2, 3])
def test_key_hashes_are_pandas_hashes(n_columns):
    rng = np.random.default_rng(10 + n_columns)
    keys = {f"k{i}": random_texts(rng, 1500, longest=70) for i in range(n_columns)}
    keys["k0"][:4] = ["", "x" * 8, "y" * 16, "z" * 7]  # SipHash's tail: empty, one whole block, two, none whole
    reference = pd.util.hash_pandas_object(pd.DataFrame({n: v.astype(str) for n, v in keys.items()}),
                                           index=False).to_numpy(np.uint64)
    np.testing.assert_array_equal(hash_keys(keys), reference)


def test_more_texts_than_a_batch_are_pandas_hashes():
    texts = np.array([f"item-{i}" for i in range(BATCH + 1234)], dtype=object)
    reference = pd.util.hash_pandas_object(pd.DataFrame({"product": texts.astype(str)}), index=False).to_numpy(np.uint64)
    assert len(texts) <= FEW_ROWS
    np.testing.assert_array_equal(pandas_hashes([texts]), reference)


def test_hundred_thousand_keys_hash_without_pandas():
    """A fit's series hashes (100k series, as the 7M-row benchmark has) import no pandas: the fit's start no
    longer waits for it."""
    code = ("import sys, numpy as np; from fitcore.data.dataset import hash_keys; "
            "h = hash_keys({'product': np.array([f'item-{i}' for i in range(100_000)], dtype=object)}); "
            "print(len(h), 'pandas' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT)
    assert out.stdout.split() == ["100000", "False"]


@pytest.mark.slow
def test_loading_fitting_and_diagnosing_many_series_import_no_pandas(tmp_path):
    """More series than the old Python hashes took (4,096): the load, the fit (its shuffled folds are seeded by
    the key hashes) and the diagnosis import no pandas, and the fold shuffle's seeds are pandas' hashes."""
    rng = np.random.default_rng(3)
    n_series, rows = 5000, 6
    price = rng.uniform(1.0, 3.0, n_series * rows).round(2)
    lines = ["product,price,volume"] + [f"item-{s},{p},{round(100 * p ** -1.2, 1)}"
                                        for s, p in zip(np.repeat(np.arange(n_series), rows), price)]
    data = tmp_path / "rows.csv"
    data.write_text("\n".join(lines) + "\n")
    code = ("import sys; from pathlib import Path; from fitcore import fit_batch; from fitcore.data.loader import load; "
            "from fitcore.data.columns import Columns; from fitcore.fit.settings import FitSettings; "
            "from fitcore.review.flags import diagnose; "
            f"d = load(Path({str(data)!r}), Columns()); diagnose(fit_batch(d, FitSettings())); "
            "print('pandas' in sys.modules, ' '.join(map(str, d.key_hash[:3].tolist())))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT)
    imported, *hashes = out.stdout.split()
    reference = pd.util.hash_pandas_object(pd.DataFrame({"product": [f"item-{s}" for s in range(3)]}),
                                           index=False).to_numpy(np.uint64)
    assert imported == "False" and [int(h) for h in hashes] == reference.tolist()
