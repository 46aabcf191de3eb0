"""Which ledger a recording command records into when ``--ledger`` is left out.

Results made by ``fit --ledger L`` name L in their header.  The triage screen's default ledger is the one
beside the results (``default_ledger``): its name changes every cycle (``r1.ledger.jsonl``, then
``r2.ledger.jsonl``), so on a later cycle's results it is a new, empty ledger — every series pending, and
the first decision starting a second ledger (a trial: one notification, gone in 10 s, said it).  Where
the default is not the ledger the results were fitted against, ``default_for`` refuses it before anything
is opened: ``--ledger`` then says which one is meant.  ``accept-unflagged`` has no default; left out, its
refusal names the ledger the results were fitted against, as the way on.
"""
from __future__ import annotations

import shlex
from pathlib import Path

from fitcore.errors import SettingsError
from fitcore.ledger.elsewhere import fitted_elsewhere
from fitcore.results.source import default_ledger
from fitcore.text import clean


def default_for(results: Path, fitted: str | None, reads: bool = False) -> Path:
    """The ledger beside ``results`` that triage records into without ``--ledger`` (``reads``: that the report
    reads); ``SettingsError`` (one line, exit 2) where the results were fitted against another ledger
    (``fitted``: their header's, None without) — a report of that default would call every series pending."""
    default = default_ledger(results)
    other = fitted_elsewhere(fitted, default)
    if other is None:
        return default
    new = "" if default.exists() else (", none there" if reads else ", a new ledger")
    if reads:  # (a ledger that is not there is nothing a report can read on purpose)
        way = f"give --ledger {_option(other)} to report on that one" + (
            f", or --ledger {_option(str(default))} to read the default on purpose" if default.exists() else "")
        raise SettingsError(f"{results}: fitted against the ledger {clean(other)}, not {default} (the default "
                            f"beside it{new}): {way}; nothing was written")
    raise SettingsError(f"{results}: fitted against the ledger {clean(other)}, not {default} (the default beside "
                        f"it{new}): give --ledger {_option(other)} to decide in that one, or --ledger "
                        f"{_option(str(default))} to record in the default on purpose; nothing was opened")


def required_for(results: Path, fitted: str | None) -> SettingsError:
    """What ``accept-unflagged`` says without ``--ledger``: the ledger the results were fitted against named as
    the way on, when they were fitted against one."""
    if fitted:
        return SettingsError(f"{results}: fitted against the ledger {clean(fitted)}, and accept-unflagged records "
                             f"only into the ledger --ledger names: give --ledger {_option(fitted)} to accept into "
                             "that one, or --ledger OTHER to record into another existing ledger on purpose; nothing "
                             "was written")
    return SettingsError("accept-unflagged records only into the ledger --ledger names: give --ledger LEDGER "
                         "(see pricefold ledger accept-unflagged --help)")


def _option(path: str) -> str:
    """A path as the shell takes it back (quoted where it holds a space), shown cleaned."""
    return clean(shlex.quote(path))
