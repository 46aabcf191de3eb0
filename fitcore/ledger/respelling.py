"""Results' series that look like a ledger's own under another spelling (pure, set-based).

A next cycle's data may spell a key value otherwise for some series only (``north`` for ``North``, ``North ``
with a trailing space, ``Café`` in decomposed form).  Keyed by the same columns and sharing the other series,
such results pass ``key_columns``' checks, and each respelled series reads as new: a bulk accept would sign it
beside the ledger's own, whose decisions are left behind.  ``respellings`` finds them: each results' series
**new to the ledger** (its key not among the ledger's series) whose key equals, *loosely*, the key of a ledger
series **missing from the results** (keyed by the same columns).  Such a pair is one series spelled two ways
but for a coincidence the loose comparison is kept too narrow to make.

Loosely (``fitcore.text.loose``), for each key value, and nothing more:

- Unicode NFKC normalisation: composed and decomposed forms read alike, and compatibility forms (full-width
  letters, ligatures, the no-break space) read as their plain forms;
- case folding (``str.casefold``, then NFKC again: folding can leave a form unnormalised);
- white space (any Unicode white space) stripped at both ends, each inner run read as one space.

Accents are not dropped (``Cafe`` is not ``Café``), punctuation and invisible format characters (a zero-width
space) are kept, and nothing is matched by similarity: a new product matches nothing and stays simply new.

Collisions: a results' series that looks like several of the ledger's missing series (the ledger holds
``North`` and ``north``, neither in the results) is one respelling, paired with the first of them in the
ledger's order (``alike`` counts them all); several results' series may look like one ledger series (``north``
and ``NORTH``): each is counted.  A ledger series present in the results exactly is not missing, so results
holding both ``North`` and ``north`` pair neither with the ledger's ``North``.

Cost: sets of key tuples; only the series new to the ledger and the ledger's missing ones are normalised (one
short ``str`` pass a value), none where no series is new.
"""
from __future__ import annotations

import unicodedata
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass

import numpy as np

from ..data.keys import SEPARATOR
from ..text import clean, loose, told_apart
from .rules import what_happened


def loose_key(values: tuple) -> tuple:
    return tuple(loose(str(v)) for v in values)


def loose_keys(keys: Sequence[tuple]) -> list[tuple]:
    """``loose_key`` of each of ``keys`` (tuples of one length), column by column: each distinct value once (a
    segment's few values, not one call a series)."""
    if not len(keys):
        return []
    columns = []
    for values in zip(*keys):
        forms = {value: loose(str(value)) for value in set(values)}
        columns.append(map(forms.__getitem__, values))
    return list(zip(*columns))


class LooseIndex:
    """Series keys (tuples of values, one order of columns for all) by their loose form, made once and probed by
    others: the results' series new to a ledger, probed by the ledger's missing series as they come."""

    def __init__(self, keys: Sequence[tuple], at: Iterable[int]) -> None:
        self._by: dict[tuple, list[int]] = {}
        for key, i in zip(loose_keys(keys), at):
            self._by.setdefault(key, []).append(int(i))
        self._first = {key[0] for key in self._by if key}  # the first column's loose values: a probe's first sieve

    def __len__(self) -> int:
        return sum(map(len, self._by.values()))

    def pairs(self, keys: Sequence[tuple], at: Sequence[int] | None = None) -> tuple[np.ndarray, np.ndarray]:
        """``(indexed, probe)``: each pair of an indexed series (its ``at`` given here) and a probing series (its
        place in ``keys``, or its ``at``) whose keys are equal loosely.  Many probes against a few indexed: only
        those whose first value is loosely one of theirs are read whole (a set look-up a probe, one ``loose`` a
        distinct first value, instead of a tuple of loose values a probe)."""
        found, probes = [], []
        get = self._by.get
        places: Sequence[int] = range(len(keys))
        if len(keys) > 4 * len(self._by) and self._first:
            first = [key[0] for key in keys]
            forms = {value: loose(str(value)) for value in set(first)}
            wanted = self._first
            places = [j for j, value in enumerate(first) if forms[value] in wanted]
            keys = [keys[j] for j in places]
        for j, key in zip(places, loose_keys(keys)):
            hits = get(key)
            if hits:
                found += hits
                probes += [j] * len(hits)
        probe = np.asarray(probes, dtype=np.int64)
        return np.asarray(found, dtype=np.int64), (probe if at is None else np.asarray(at, np.int64)[probe])


NO_INDICES = np.zeros(0, np.int64)
NO_INDICES.setflags(write=False)


@dataclass(frozen=True, eq=False)
class Respelled:
    """Results' series that look like a ledger's under another spelling.

    ``results`` (P,) int64: each one's index among the results' series, ascending; ``ledger`` (P,) int64: the
    index among the ledger's series of the first (in the ledger's order) missing series it looks like; ``alike``
    (P,) int64: how many of the ledger's missing series it looks like (1 unless the ledger's own spellings
    collide); ``new``: how many results' series are new to the ledger, these included; ``example``: the first
    pair's differing values, cleaned (``region "north" for "North"``; None when P is 0).  The ledger's spellings
    the results hold only under another, decided or not, are ``fitcore.ledger.missing.Missing.beside``'s."""

    results: np.ndarray
    ledger: np.ndarray
    alike: np.ndarray
    new: int
    example: str | None

    def __len__(self) -> int:
        return len(self.results)

    @property
    def unmatched(self) -> int:
        """Results' series new to the ledger that look like none of its series (new products, most likely)."""
        return self.new - len(self)

    def said(self, ledger_name: str = "the ledger", what: str = "series") -> str | None:
        """'54 series in these results look like series in L under another spelling (region "north" for
        "North", …)' — one clause (``what``: what the ledger's are, e.g. "signed series"); None when none."""
        if not len(self):
            return None
        count = len(self)
        verb = f"looks like a {what}" if count == 1 else f"look like {what}"
        more = ", …" if count > 1 else ""
        return (f"{count:,} series in these results {verb} in {ledger_name} under another spelling "
                f"({self.example}{more})")

    def looks_like(self) -> dict[int, int]:
        """Results' series → the ledger series it looks like (indices as in ``results`` and ``ledger``)."""
        return dict(zip(self.results.tolist(), self.ledger.tolist()))


NONE = Respelled(NO_INDICES, NO_INDICES, NO_INDICES, 0, None)


def gathered(results_at: np.ndarray, ledger_at: np.ndarray, new: int, columns: Sequence[str],
             results_key: Callable[[int], tuple], ledger_key: Callable[[int], tuple]) -> Respelled:
    """``Respelled`` from raw pairs (in any order, repeats allowed: a results' series and each ledger series it
    looks like); ``results_key`` / ``ledger_key``: a series' key tuple by its index, for the example."""
    if not len(results_at):
        return Respelled(NONE.results, NONE.ledger, NONE.alike, new, None)
    pairs = np.unique(np.stack([results_at, ledger_at], axis=1), axis=0)  # sorted by results, then ledger order
    first = np.r_[True, pairs[1:, 0] != pairs[:-1, 0]]
    starts = np.flatnonzero(first)
    alike = np.diff(np.r_[starts, len(pairs)])
    results, ledger = pairs[first, 0], pairs[first, 1]
    for array in (results, ledger, alike):
        array.setflags(write=False)
    example = spelled(columns, results_key(int(results[0])), ledger_key(int(ledger[0])))
    return Respelled(results, ledger, alike, new, example)


def spelled(columns: Sequence[str], theirs: tuple, ours: tuple) -> str:
    """'region "north" for "North"': each key column whose values differ, the results' value for the ledger's,
    cleaned; two that read the same once printed are told apart (``fitcore.text.told_apart``: the one not in NFC
    form as ``cre⟨U+0300⟩me``, a space at an end as ``East⟨U+0020⟩``), and a difference in Unicode form only is
    said."""
    parts = []
    for name, a, b in zip(columns, theirs, ours):
        if a == b:
            continue
        (a_shown,), (b_shown,) = told_apart([(clean(str(a)),), (clean(str(b)),)])
        said = f'{clean(str(name))} "{a_shown}" for "{b_shown}"'
        if unicodedata.normalize("NFC", str(a)) == unicodedata.normalize("NFC", str(b)):
            said += " in another Unicode form"
        parts.append(said)
    return ", ".join(parts)


def respellings(results_keys: Iterable[dict], ledger_keys: Iterable[dict],
                columns: Sequence[str] | None = None) -> Respelled:
    """The rule on whole sets of keys: ``results_keys`` (each results' series' key, a dict), ``ledger_keys`` (each
    ledger series' key; those keyed by other columns than ``columns`` — by default the first results key's — are
    passed over); indices in ``Respelled`` are places in those two sequences."""
    results = results_keys if isinstance(results_keys, list) else list(results_keys)
    if columns is None:
        columns = tuple(results[0]) if results else ()
    ledger = _tuples(ledger_keys if isinstance(ledger_keys, list) else list(ledger_keys), columns)
    values = _tuples(results, columns)
    held = set(ledger)
    new = [i for i, key in enumerate(values) if key not in held]
    if not new:  # every results' series is the ledger's: nothing more is looked at
        return NONE
    have = set(values)
    missing = [j for j, key in enumerate(ledger) if key is not None and key not in have]
    return among([values[i] for i in new], new, [ledger[j] for j in missing], missing, columns)


def _tuples(keys: list[dict], columns: Sequence[str]) -> list[tuple | None]:
    """Each key's values in ``columns`` order, column by column (a comprehension a column, not one call a key);
    None for a key of other columns (one more or fewer, or another name: a value missing)."""
    width = len(columns)
    lists = [[key.get(name) for key in keys] for name in columns]
    out: list = list(zip(*lists)) if columns else [()] * len(keys)
    odd = {i for i, key in enumerate(map(len, keys)) if key != width}
    for values in lists:
        if None in values:  # a column this key lacks (key values are text, never null)
            odd.update(i for i, value in enumerate(values) if value is None)
    for i in odd:
        out[i] = None
    return out


def among(new: Sequence[tuple], new_at: Sequence[int], missing: Sequence[tuple], missing_at: Sequence[int],
          columns: Sequence[str]) -> Respelled:
    """The rule where the exact matching is done already: ``new``, the key tuples (in ``columns`` order) of the
    results' series new to the ledger, at ``new_at`` among the results' series; ``missing``, those of the ledger's
    series keyed alike and missing from the results, at ``missing_at`` among its series."""
    if not len(new) or not len(missing):
        return Respelled(NONE.results, NONE.ledger, NONE.alike, len(new), None)
    if len(missing) < len(new):  # the smaller side indexed, the larger probing it
        probe, found = LooseIndex(missing, missing_at).pairs(new, new_at)
    else:
        found, probe = LooseIndex(new, new_at).pairs(missing, missing_at)
    theirs, ours = dict(zip(map(int, new_at), new)), dict(zip(map(int, missing_at), missing))
    return gathered(found, probe, len(new), columns, theirs.__getitem__, ours.__getitem__)


def beside(theirs: Iterable, ours: Iterable) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """A look-alike's key values (``theirs``) and those of the ledger series it looks like (``ours``), one order of
    columns for both, as shown beside each other: cleaned, and told apart where they read the same
    (``fitcore.text.told_apart``: ``East⟨U+0020⟩`` beside ``East``, ``cre⟨U+0300⟩me`` beside ``crème``).  The one
    form a look-alike is given wherever it is shown: the screen's row and evidence, ``show``'s list and its line
    in full, the sentence (``looks_like``) — never only where another series happens to be listed beside it."""
    mine, its = told_apart([tuple(clean(str(v)) for v in theirs), tuple(clean(str(v)) for v in ours)])
    return mine, its


def ledger_spelling(theirs: Sequence, ours: Sequence) -> str:
    """'North': the ledger's spelling (``ours``, shown ``beside`` ``theirs``) of the values a look-alike spells
    otherwise — the ``≈North`` of the screen's row and ``show``'s list."""
    _, shown = beside(theirs, ours)
    return SEPARATOR.join(its for a, b, its in zip(theirs, ours, shown) if a != b)


def looks_like(columns: Sequence[str], theirs: tuple, ours: tuple, ledger_name: str, latest: dict | None = None,
               others: int = 0) -> str:
    """'lemons · North in L under another spelling (region "north" for "North"), a series these results do not hold
    (ana accepted poly1 at …)' — what a results' series (``theirs``, its key's values in ``columns`` order) looks like,
    said after its name and "looks like" by the screen and ``show``; ``latest``: the ledger series' latest record;
    ``others``: how many more of the ledger's series it looks like."""
    more = f" and {others} more spelled alike" if others > 0 else ""
    said = f" ({what_happened(latest)})" if latest is not None else ""
    _, shown = beside(theirs, ours)
    return (f"{SEPARATOR.join(shown)}{more} in {ledger_name} under another spelling "
            f"({spelled(columns, theirs, ours)}), a series these results do not hold{said}")
