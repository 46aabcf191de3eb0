"""Whether a results file's backtest was made against another ledger than the one it is read with.

``fit --ledger`` records the ledger it backtested against in the results' header (``ledger``: its path and
head).  Read with another ledger (a copy, a colleague's), that backtest and its ``shifted`` flags speak of
the other ledger's signers: ``ledger carry`` refuses such results, ``show --ledger`` and the triage screen
leave both out.  ``backtested_elsewhere`` is the one rule the three ask.
"""
from __future__ import annotations

from pathlib import Path

from ..text import clean


def same_file(a: Path, b: Path) -> bool:
    """Whether two paths name one file (the same path resolved, or the same file through a link)."""
    try:
        return a.resolve() == b.resolve() or (a.exists() and b.exists() and a.samefile(b))
    except OSError:
        return False


def backtested_elsewhere(results: Path, header: dict, ledger_path: Path) -> str | None:
    """"RESULTS: backtested against L, not OTHER" when the results (``header``, from the file ``results``) were
    fitted with ``--ledger`` on another ledger than ``ledger_path``; None: on this one, or without a ledger."""
    source = header.get("ledger")
    if not source or same_file(Path(source["path"]), ledger_path):
        return None
    return f"{results}: backtested against {clean(str(source['path']))}, not {ledger_path}"


def without_backtest(record: dict) -> dict:
    """A results record less its backtest and its ``shifted`` flag (both of another ledger's signed curves)."""
    flags = [flag for flag in record["flags"] if flag["code"] != "shifted"]
    return {**record, "backtest": None, "flags": flags}
