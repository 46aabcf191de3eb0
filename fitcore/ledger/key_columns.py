"""Whether a results file and a ledger name their series by the same key columns (pure).

A ledger's records name each series by its key (``series``: column → value).  Results keyed by other
columns (a segment ``status`` where the ledger's series have ``region``) find none of the ledger's series:
every one reads as pending, and a bulk accept would add a second, unrelated set of series to the ledger.
``mismatch`` is the one check every command that brings results and a ledger together asks: the
writers (``accept-unflagged``, ``carry``) refuse, the readers (``export``, ``show --ledger``,
``fit --ledger``) say it as their README section states.  An empty ledger takes any key columns, and a
ledger that already holds several sets (two data sets in one team ledger) takes results keyed by any one of them.
"""
from __future__ import annotations

from collections.abc import Iterable

from ..text import clean


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
