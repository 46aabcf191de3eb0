"""Whether a results file and a ledger name their series by the same key columns (pure).

A ledger's records name each series by its key (``series``: column → value).  Results keyed by other
columns (a segment ``status`` where the ledger's series have ``region``) find none of the ledger's series:
every one reads as pending, and a bulk accept would add a second, unrelated set of series to the ledger.
``mismatch`` is the one check every command that brings results and a ledger together asks: the
writers (``accept-unflagged``, ``carry``) refuse, the readers (``export``, ``show --ledger``,
``fit --ledger``) say it as their README section states.  An empty ledger takes any key columns, and a
ledger that already holds several sets (two data sets in one team ledger) takes results keyed by any one of them.

Results keyed by the same columns may still share no series with a non-empty ledger (the segment values
spelled otherwise, ``north`` for ``North``; or another product range in a team ledger): ``none_shared`` says
it in one clause.  Such a ledger is legitimate, so readers warn and read on; ``accept-unflagged`` asks for
``--new-series`` before it starts a set of series beside the ledger's own.
"""
from __future__ import annotations

from collections.abc import Collection, Iterable

from ..text import clean
from .replay import series_id


def results_columns(header: dict) -> list[str] | None:
    """The key columns of a results file, product first, from its header's settings (None: not said)."""
    columns = (header.get("settings") or {}).get("columns") or {}
    if not columns.get("product"):
        return None
    return [str(columns["product"]), *map(str, columns.get("segments") or ())]


def key_sets(keys: Iterable[dict]) -> list[frozenset]:
    """The distinct sets of key columns among series ``keys`` (dicts), in the order first met."""
    seen: dict[tuple, frozenset] = {}  # by the key's own order: one tuple a key, a frozenset a distinct order
    for key in keys:
        names = tuple(key)
        if names not in seen:
            seen[names] = frozenset(names)
    return list(dict.fromkeys(seen.values()))


def mismatch(columns: list[str] | None, ledger_keys: Iterable[dict], ledger_name: str = "the ledger") -> str | None:
    """Why results keyed by ``columns`` (product first) match none of the series in a ledger (``ledger_keys``:
    its series' keys; ``ledger_name``: how to name it), as one clause naming both column sets; None when they
    match, the ledger is empty or the results do not say their columns."""
    if not columns:
        return None
    sets = key_sets(ledger_keys)
    if not sets or frozenset(columns) in sets:
        return None
    product = columns[0]
    theirs = " or ".join(_named(s, product) for s in sets)
    return (f"series keyed by {', '.join(map(clean, columns))}, but those in {ledger_name} by {theirs} "
            "(not one of its series is in these results)")


def _named(names: frozenset, product: str) -> str:
    """A ledger's key columns, the results' product column first where it has it, the rest in order."""
    ordered = sorted(names, key=lambda name: (name != product, name))
    return ", ".join(map(clean, ordered))


def none_shared(shared: bool, ledger_series: int, ledger_name: str = "the ledger", what: str = "series"
                ) -> str | None:
    """Why results share not one series with a ledger holding ``ledger_series`` series (``shared``: whether
    any of them is in the results; ``what``: what they are, e.g. "signed series"), as one clause; None when
    one is shared or the ledger holds none."""
    if shared or not ledger_series:
        return None
    return (f"none of the {ledger_series:,} {what} in {ledger_name} is in these results "
            "(the same key columns, other values)")


def none_of_keys(results_keys: Iterable[dict], ledger_ids: Collection[str], ledger_name: str = "the ledger"
                 ) -> str | None:
    """``none_shared`` of results' series ``results_keys`` (dicts) and a ledger's series ``ledger_ids``
    (``replay.series_id`` of each: a ledger's ``histories``)."""
    if not ledger_ids:
        return None
    return none_shared(any(series_id(key) in ledger_ids for key in results_keys), len(ledger_ids), ledger_name)
