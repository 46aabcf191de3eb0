"""A ledger's signed series that these results do not hold (pure, set-based).

A product renamed in the next cycle's data (``carrots 1 kg`` → ``carrots 1kg``) is no respelling by the loose rule
(``respelling``): the new name reads as a new series, and the signed one simply is not in the results.  Every
command that brings results and a ledger together says how many of the ledger's **signed** series — those whose
standing decision signs a curve: an accept, an override or a carry (a hold or a note signs none) — keyed by the
results' columns are not among the results' series, with the first one (in the ledger's order) as an example —
the first the results hold in no spelling: a series the results hold only under another (matched loosely, by
``respelling``'s rule, against every results' series: a look-alike new to the ledger or one decided since, as a
new series) is counted, said in its own clause, and named only where every one is such (``Missing.beside``).

A team ledger may hold other product ranges on purpose, and results may be a subset (a plan on some products, a
``show --product`` filter): so it is a note, never a refusal, and a caller showing a filtered list counts only
within its filter (``within``).  Where not one of the ledger's series keyed alike is in the results, the
"none of …" clause (``key_columns.none_shared``) says more, and this one is not said.

Cost: one pass over the ledger's series and a set of the results' key tuples (100,000 series: tens of ms);
``beside`` adds one ``loose`` a distinct value of the smaller side and, probing from the larger, one of its first
column's (``LooseIndex.pairs``' sieve): 100,000 results against 1,000 missing, tens of ms.
"""
from __future__ import annotations

from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, replace

import numpy as np

from ..data.keys import SEPARATOR
from ..text import clean, told_apart
from .respelling import LooseIndex

SIGNING = ("accept", "override", "carry")  # standing decisions that sign a curve into the plan
RENAMED = "renamed in the data? the new names read as new series, the decisions stay under the old ones"


def signing(record: dict | None) -> bool:
    """Whether a series' standing record (its ``current``) signs a curve."""
    return record is not None and record["action"] in SIGNING


@dataclass(frozen=True)
class Missing:
    """The ledger's signed series keyed by the results' columns and missing from them (``keys``, in the ledger's
    order); ``shared``: whether any of the ledger's series keyed alike is in the results at all; ``alike``: per key,
    whether a results' series looks like it under another spelling (``beside``; empty: not asked).  Such a one is
    counted (the results do not hold it as spelled) but chosen as the example only where every one is such."""

    keys: tuple
    shared: bool = True
    columns: tuple = ()  # the results' key columns, product first: the example's order (else the key's own)
    alike: tuple = ()
    twins: tuple = ()  # per key, the first results' key (values in ``columns`` order) it looks like, or None

    def __len__(self) -> int:
        return len(self.keys)

    def beside(self, results: Sequence[dict] | Sequence[tuple]) -> Missing:
        """These, told which the results hold under another spelling: each matched loosely (the look-alikes' rule,
        ``fitcore.ledger.respelling``) against every one of ``results`` (the results' series' keys: dicts, or
        tuples of values in ``columns`` order, ``results_values``), decided or new to the ledger, so the note's
        "present only under another spelling" stays true once a look-alike is decided.  The smaller side is
        indexed (``LooseIndex``), the larger probes it."""
        if not self.keys or not len(results):
            return self
        columns = self.columns or tuple(self.keys[0])
        ours = list(_tuples(self.keys, columns))
        if isinstance(results[0], dict):
            results = list(_tuples(results, columns))
        if len(ours) < len(results):
            theirs_at, ours_at = LooseIndex(ours, range(len(ours))).pairs(results)[::-1]
        else:
            theirs_at, ours_at = LooseIndex(results, range(len(results))).pairs(ours)
        twins: list = [None] * len(ours)
        if len(ours_at):
            order = np.lexsort((theirs_at, ours_at))  # by missing key, then the results' order: its first twin first
            ours_at, theirs_at = ours_at[order], theirs_at[order]
            first = np.r_[True, ours_at[1:] != ours_at[:-1]]
            for j, i in zip(ours_at[first].tolist(), theirs_at[first].tolist()):
                twins[j] = results[i]
        return replace(self, alike=tuple(twin is not None for twin in twins), twins=tuple(twins))

    def shown(self) -> list[tuple[str, ...]]:
        """The keys as a list shows them (``clean``'s, values in the results' column order): the ``beside`` of
        ``fitcore.text.told_apart`` for the results' series listed under this note, so that one reading like a
        ledger series named here is told apart from it (``apples 1 kg⟨U+0020⟩`` beside ``apples 1 kg``)."""
        if not self.keys:
            return []
        columns = self.columns or tuple(self.keys[0])
        return [tuple(clean(str(v)) for v in values) for values in _tuples(self.keys, columns)]

    def said(self, ledger_name: str = "the ledger") -> str | None:
        """'3 signed series in L are not in these results (carrots 1 kg · North, …)' — one clause; None when
        none is missing, or none of the ledger's series is in the results (another clause says that).  Where
        some are look-alikes' ledger spellings: '(carrots 1 kg · North, …; 2 of them present only under another
        spelling)'; where all are: '(each present only under another spelling: tea bags 80 · South, …)'."""
        if not self.keys or not self.shared:
            return None
        verb = "is" if len(self.keys) == 1 else "are"
        return f"{len(self.keys):,} signed series in {ledger_name} {verb} not in these results ({self.example})"

    def short(self, ledger_name: str = "the ledger") -> str | None:
        """'3 signed series of L (carrots 1 kg · North, …)': ``said`` under a heading that says the rest."""
        if not self.keys or not self.shared:
            return None
        return f"{len(self.keys):,} signed series of {ledger_name} ({self.example})"

    def listed(self, limit: int | None = None) -> list[str]:
        """Every key, one a line as ``example`` names the first ('apples 1 kg · North'), and where the results hold
        it under another spelling, which ('apples 1 kg · North — in these results as apples 1 kg⟨U+0020⟩ · North');
        past ``limit`` keys, a last line '… and 1,234 more'."""
        out = []
        for at in range(len(self.keys[:limit])):
            line = SEPARATOR.join(self._shown(at))
            twin = self.twins[at] if self.twins else None
            if twin is not None:
                theirs = tuple(clean(str(v)) for v in twin)
                line += f" — in these results as {SEPARATOR.join(told_apart([theirs], [self._values(at)])[0])}"
            out.append(line)
        if limit is not None and len(self.keys) > limit:
            out.append(f"… and {len(self.keys) - limit:,} more")
        return out

    def _values(self, at: int) -> tuple[str, ...]:
        """Key ``at``'s values, cleaned, in the results' column order (else its own)."""
        key = self.keys[at]
        return tuple(clean(str(key[name])) for name in self.columns or key)

    def _shown(self, at: int) -> tuple[str, ...]:
        """Key ``at``'s values as shown: told apart from the results' series it looks like, where it has one."""
        twin = self.twins[at] if self.twins else None
        values = self._values(at)
        return values if twin is None else told_apart([values], [tuple(clean(str(v)) for v in twin)])[0]

    @property
    def example(self) -> str:
        """'carrots 1 kg · North, …': the first that no results' series looks like (else the first), cleaned, its
        values in the results' column order, told apart from the results' series it looks like where the two read
        the same (the ledger's ``cafe⟨U+0301⟩`` where the results spell it composed); what the look-alikes'
        spellings among them are, where any is."""
        alike = sum(self.alike)
        at = self.alike.index(False) if 0 < alike < len(self.keys) else 0
        more = ", …" if len(self.keys) > 1 else ""
        named = SEPARATOR.join(self._shown(at)) + more
        if not alike:
            return named
        if alike < len(self.keys):
            return f"{named}; {alike:,} of them present only under another spelling"
        return f"{'each ' if len(self.keys) > 1 else ''}present only under another spelling: {named}"


NONE = Missing(())


def signed_keys(histories: dict, columns: Sequence[str], within: Callable[[dict], bool] | None = None) -> list[dict]:
    """The keys of the ledger's series (``histories``, its replay) whose standing decision signs a curve, keyed by
    exactly ``columns``, in the ledger's order; ``within``: only those it keeps (a filter on the results)."""
    names = set(columns)
    out = [h.current["series"] for h in histories.values() if signing(h.current)]
    return [key for key in out if key.keys() == names and (within is None or within(key))]


def missing_at(signed: Sequence[dict], at, columns: Sequence[str], shared: bool = True) -> Missing:
    """``Missing`` of signed series ``signed`` (keys, ledger order) found among the results at ``at`` (-1: not there;
    a ``SeriesKeys.indices_of``), those keyed by exactly ``columns``."""
    names = set(columns)
    gone = tuple(key for key, i in zip(signed, at.tolist()) if i < 0 and key.keys() == names)
    return Missing(gone, shared, tuple(columns))


def missing_from(results_keys: Sequence[dict], histories: dict, within: Callable[[dict], bool] | None = None,
                 columns: Sequence[str] | None = None) -> Missing:
    """``Missing`` of results whose series' keys are ``results_keys`` (dicts, keyed by ``columns``: by default the
    first key's) against a ledger's replay ``histories``."""
    if not histories or not len(results_keys):
        return NONE
    columns = tuple(results_keys[0]) if columns is None else tuple(columns)
    signed = signed_keys(histories, columns, within)
    if not signed:
        return NONE
    have = set(_tuples(results_keys, columns))
    gone = [key for key, values in zip(signed, _tuples(signed, columns)) if values not in have]
    if not gone:
        return NONE
    shared = len(gone) < len(signed) or any(
        values in have for values in _tuples(_keyed(histories, columns), columns))
    return Missing(tuple(gone), shared, columns)


def results_values(keys) -> list[tuple]:
    """Each results' series' key values in the results' column order (``keys``: a ``SeriesKeys``), column by
    column: what ``Missing.beside`` matches against."""
    from ..arrays import objects
    return list(zip(*(objects(keys.columns[name]).tolist() for name in keys.names)))


def _keyed(histories: dict, columns: Sequence[str]) -> list[dict]:
    names = set(columns)
    return [key for key in (h.latest["series"] for h in histories.values()) if key.keys() == names]


def _tuples(keys: Iterable[dict], columns: Sequence[str]) -> Iterable[tuple]:
    """Each key's values in ``columns`` order, a column at a time (a comprehension a column, not a call a key)."""
    keys = keys if isinstance(keys, (list, tuple)) else list(keys)
    return zip(*([key.get(name) for key in keys] for name in columns)) if columns else iter([()] * len(keys))
