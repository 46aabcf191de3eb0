"""Series keys as Arrow text columns: labels, search, sort and lookup without a Python object per series.

A triage list of millions of series draws a few dozen labels at a time; the
rest of the work (find a text, sort by key, find the series a ledger record
names) runs as Arrow compute over whole columns.
"""
from __future__ import annotations

from functools import cached_property

import numpy as np

from ..arrays import integers, numbers, texts
from ..text import original

SEPARATOR = " · "
FEW_KEYS = 32  # up to this many keys, ``indices_of`` scans instead of joining


class SeriesKeys:
    """The key columns of S series (product first, then segments)."""

    def __init__(self, names: tuple[str, ...], columns: dict) -> None:
        import pyarrow as pa

        def text(values):
            array = values if isinstance(values, (pa.Array, pa.ChunkedArray)) else pa.array(values, pa.string())
            if isinstance(array, pa.ChunkedArray):
                array = array.combine_chunks()
            if pa.types.is_string(array.type):
                return array
            import pyarrow.compute as pc  # only here: 0.1 s to import, and stored keys are text already
            return pc.cast(array, pa.string())
        self.names = tuple(names)
        self.columns = {name: text(columns[name]) for name in self.names}

    @classmethod
    def of(cls, data) -> SeriesKeys:
        return cls(data.key_names, data.keys)

    def __len__(self) -> int:
        return len(self.columns[self.names[0]]) if self.names else 0

    def key_of(self, s: int) -> dict[str, str]:
        return {name: self.columns[name][s].as_py() for name in self.names}

    def label(self, s: int) -> str:
        """The series' key as one line of text, as the data hold it (not yet made safe to print)."""
        return SEPARATOR.join(self.columns[name][s].as_py() for name in self.names)

    @cached_property
    def labels(self):
        """(S,) Arrow text: every label (built once, on the first search or sort by key)."""
        import pyarrow.compute as pc
        columns = [self.columns[name] for name in self.names]
        return columns[0] if len(columns) == 1 else pc.binary_join_element_wise(*columns, SEPARATOR)

    def matching(self, needle: str, forms: bool = True) -> np.ndarray:
        """(S,) bool: the label contains ``needle``, ignoring case — as typed, or as the text its shown forms
        stand for (``⟨U+202E⟩``, ``␊``: ``fitcore.text.original``), or (``forms``) in either Unicode normal
        form (a typed 'é' finds a name holding 'e' and a combining accent)."""
        import unicodedata

        import pyarrow.compute as pc
        raw = original(needle)
        needles = {needle, raw} if raw.isascii() or not forms else {
            needle, raw, *(unicodedata.normalize(form, raw) for form in ("NFC", "NFD"))}
        found = None
        for text in needles:
            hit = pc.match_substring(self.labels, text, ignore_case=True)
            found = hit if found is None else pc.or_(found, hit)
        return numbers(pc.fill_null(found, False))

    def nfc_twins(self) -> np.ndarray:
        """(S,) bool: the label is not in NFC form and another series' label reads the same (has the same NFC
        form: ``café`` with ``e`` and a combining accent beside ``café`` composed), over whole columns."""
        import pyarrow as pa
        import pyarrow.compute as pc
        labels = self.labels
        if not len(labels) or pc.all(pc.string_is_ascii(labels)).as_py() is not False:
            return np.zeros(len(labels), dtype=bool)
        nfc = pc.utf8_normalize(labels, form="NFC")
        codes = pc.dictionary_encode(nfc)
        codes = codes.combine_chunks() if isinstance(codes, pa.ChunkedArray) else codes
        indices = numbers(pc.fill_null(codes.indices, -1)).astype(np.int64)
        counts = np.bincount(indices[indices >= 0], minlength=len(codes.dictionary))
        unnormal = numbers(pc.fill_null(pc.not_equal(nfc, labels), False))
        return unnormal & (indices >= 0) & (counts[np.maximum(indices, 0)] > 1)

    def sorted_order(self) -> np.ndarray:
        """Series indices by label (ties in index order)."""
        import pyarrow as pa
        import pyarrow.compute as pc
        table = pa.table({"label": self.labels, "at": integers(np.arange(len(self)))})
        return numbers(pc.sort_indices(table, sort_keys=[("label", "ascending"), ("at", "ascending")])).astype(np.int64)

    def indices_of(self, keys: list[dict]) -> np.ndarray:
        """(len(keys),) the series each key names, -1 where none — and where a key's columns are not these
        series' key columns (a ledger's series keyed by product and region name none of a fit by product alone,
        whatever their values: ``fitcore.ledger.key_columns``).

        A few keys (a screen's poll of the ledger) are found by a scan of the first key column each
        (~0.3 ms at 100,000 series); more by a hash join, whose table of every series costs ~20 ms.
        """
        if not keys:
            return np.zeros(0, np.int64)
        names = set(self.names)
        if len(keys) <= FEW_KEYS:
            return np.array([self._scan([str(key[name]) for name in self.names]) if key.keys() == names else -1
                             for key in keys], np.int64)
        found = self._join({name: texts([str(key.get(name, "")) for key in keys]) for name in self.names}, len(keys))
        found[[key.keys() != names for key in keys]] = -1
        return found

    def _scan(self, values: list[str]) -> int:
        """The first series whose key columns hold ``values``, -1 if none."""
        import pyarrow as pa
        import pyarrow.compute as pc
        found = np.flatnonzero(numbers(pc.fill_null(pc.equal(self.columns[self.names[0]], values[0]), False)))
        for name, value in zip(self.names[1:], values[1:]):
            if not len(found):
                break
            same = pc.fill_null(pc.equal(self.columns[name].take(pa.array(found)), value), False)
            found = found[numbers(same)]
        return int(found[0]) if len(found) else -1

    def positions_of(self, other: SeriesKeys) -> np.ndarray:
        """(len(other),) where each of ``other``'s series is here, -1 where it is not."""
        return self._join(other.columns, len(other))

    def _join(self, columns: dict, n: int) -> np.ndarray:
        import pyarrow as pa
        ours = pa.table({**{f"k{i}": self.columns[name] for i, name in enumerate(self.names)},
                         "_s": integers(np.arange(len(self)))})
        wanted = pa.table({**{f"k{i}": columns[name] for i, name in enumerate(self.names)},
                           "_at": integers(np.arange(n))})
        joined = wanted.join(ours, [f"k{i}" for i in range(len(self.names))], join_type="left outer")
        out = np.full(n, -1, dtype=np.int64)
        at = numbers(joined.column("_at").combine_chunks())
        found = numbers(joined.column("_s").combine_chunks()).astype(float)  # NaN where no series matched
        ok = ~np.isnan(found)
        out[at[ok]] = found[ok].astype(np.int64)
        return out
