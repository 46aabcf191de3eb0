"""A ledger's signed series that these results do not hold (pure, set-based).

A product renamed in the next cycle's data (``carrots 1 kg`` → ``carrots 1kg``) is no respelling by the loose rule
(``respelling``): the new name reads as a new series, and the signed one simply is not in the results.  Every
command that brings results and a ledger together says how many of the ledger's **signed** series — those whose
standing decision signs a curve: an accept, an override or a carry (a hold or a note signs none) — keyed by the
results' columns are not among the results' series, with the first one (in the ledger's order) as an example —
the first the results hold in no spelling: a series the results hold only under another (a look-alike,
``respelling``, said in its own clause) is counted, and named only where every one is such (``Missing.beside``).

A team ledger may hold other product ranges on purpose, and results may be a subset (a plan on some products, a
``show --product`` filter): so it is a note, never a refusal, and a caller showing a filtered list counts only
within its filter (``within``).  Where not one of the ledger's series keyed alike is in the results, the
"none of …" clause (``key_columns.none_shared``) says more, and this one is not said.

Cost: one pass over the ledger's series and a set of the results' key tuples (100,000 series: tens of ms).
"""
from __future__ import annotations

from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, replace

from ..data.keys import SEPARATOR
from ..text import clean

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

    def __len__(self) -> int:
        return len(self.keys)

    def beside(self, spelled: Iterable[dict]) -> Missing:
        """These, told which are the ledger's spellings of look-alikes: ``spelled``, the keys of the ledger series
        some results' series look like (``fitcore.ledger.respelling.Respelled.paired``)."""
        spelled = spelled if isinstance(spelled, list) else list(spelled)
        if not self.keys or not spelled:
            return self
        columns = self.columns or tuple(self.keys[0])
        theirs = set(_tuples(spelled, columns))
        return replace(self, alike=tuple(values in theirs for values in _tuples(self.keys, columns)))

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

    @property
    def example(self) -> str:
        """'carrots 1 kg · North, …': the first that no results' series looks like (else the first), cleaned, its
        values in the results' column order; what the look-alikes' spellings among them are, where any is."""
        alike = sum(self.alike)
        first = self.keys[self.alike.index(False) if 0 < alike < len(self.keys) else 0]
        more = ", …" if len(self.keys) > 1 else ""
        named = SEPARATOR.join(clean(str(first[name])) for name in self.columns or first) + more
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


def _keyed(histories: dict, columns: Sequence[str]) -> list[dict]:
    names = set(columns)
    return [key for key in (h.latest["series"] for h in histories.values()) if key.keys() == names]


def _tuples(keys: Iterable[dict], columns: Sequence[str]) -> Iterable[tuple]:
    """Each key's values in ``columns`` order, a column at a time (a comprehension a column, not a call a key)."""
    keys = keys if isinstance(keys, (list, tuple)) else list(keys)
    return zip(*([key.get(name) for key in keys] for name in columns)) if columns else iter([()] * len(keys))
