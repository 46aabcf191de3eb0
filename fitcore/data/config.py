"""The settings file ``pricefold.toml``: its tables and keys, checked against the settings table.

Which tables and keys exist, and the TOML types each accepts, come from the one table of settings
(``fitcore.fit.settings.OPTIONS``, plus the flag thresholds): the caller passes them in, so this module
only reads the file and says, in one line, what is wrong with it.  Unknown tables or keys are an error
naming the valid ones.  For example::

    [columns]
    product = "sku"
    segments = ["region"]
    date = "week"
    sep = ";"              # one character; "\\t" for tab
    controls = ["promo"]   # held fixed while every curve is fitted

    [fit]
    degrees = "0-3"        # or [0, 1, 2, 3]
    folds = 5              # or "loo"
    fold_order = "time"
    season = 2             # sine/cosine pairs of the day of the year, 0-4
    plan_price = 2.5       # or plan = "plan.csv"

    [thresholds]
    min_points = 10

    [units]                # labels only, for the triage screen
    price = "EUR"
    volume = "cases/week"
"""
from __future__ import annotations

import tomllib
from pathlib import Path

from ..errors import SettingsError
from ..text import quoted

DEFAULT_NAME = "pricefold.toml"
KIND_NAMES = {str: "text", list: "a list", bool: "true or false", int: "a whole number", float: "a number"}


def load_config(path: Path | None, keys: dict[str, dict[str, tuple]], *, cwd: Path | None = None) -> dict:
    """The settings file's tables (``{}`` when there is none), with ``"_path"`` naming the file.

    ``path`` None: ``pricefold.toml`` in ``cwd``, if there is one.  ``keys``: table → key → the TOML
    value types accepted.
    """
    if path is None:
        path = (cwd or Path.cwd()) / DEFAULT_NAME
        if not path.exists() and not path.is_symlink():
            return {}
    elif not path.exists():
        raise SettingsError(f"{path}: settings file not found")
    if not path.is_file():
        raise SettingsError(f"{path}: expected a settings file (TOML), found a folder or a special file")
    try:
        document = tomllib.loads(path.read_text(encoding="utf-8"))
    except UnicodeDecodeError:
        raise SettingsError(f"{path}: expected UTF-8 text (a TOML settings file)") from None
    except tomllib.TOMLDecodeError as exc:
        raise SettingsError(f"{path}: not valid TOML ({exc})") from None
    except OSError as exc:
        raise SettingsError(f"{path}: cannot read the settings file ({exc.strerror})") from None
    for table, values in document.items():
        if table not in keys:
            raise SettingsError(f"{path}: unknown table [{table}]; expected one of "
                                f"{', '.join(f'[{t}]' for t in keys)}")
        if not isinstance(values, dict):
            raise SettingsError(f"{path}: {table} must be a table, like [{table}]")
        for key, value in values.items():
            if key not in keys[table]:
                raise SettingsError(f"{path}: unknown key {quoted(key)} in [{table}]; expected one of "
                                    f"{', '.join(sorted(keys[table]))}")
            kinds = keys[table][key]
            if isinstance(value, bool) and bool not in kinds or not isinstance(value, kinds):
                wanted = " or ".join(KIND_NAMES[k] for k in kinds)
                got = quoted(value) if isinstance(value, str) else repr(value)
                raise SettingsError(f"{path}: [{table}] {key} should be {wanted}, got {got}")
    document["_path"] = str(path)
    return document
