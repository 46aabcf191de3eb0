"""The settings file ``pricefold.toml``: columns, fit options and flag thresholds.

Precedence: command line > settings file > built-in defaults.  Unknown
tables or keys are an error naming the key and the valid ones.

```toml
[columns]
product = "sku"
segments = ["region"]
price = "unit_price"
volume = "units"
date = "week"
weight = "w"
sep = ";"

[fit]
degrees = "0-3"        # or [0, 1, 2, 3]
loglog = true
semilog = false
folds = 5              # or "loo"
fold_order = "time"
seed = 0
rule = "one-se"
plan_price = 2.5       # or plan = "plan.csv"

[thresholds]
min_points = 10

[units]                # labels only, for the triage screen
price = "EUR"
volume = "cases/week"
```
"""
from __future__ import annotations

import tomllib
from pathlib import Path

from ..errors import SettingsError
from ..review.thresholds import Thresholds

DEFAULT_NAME = "pricefold.toml"
TEXT, NUMBER = (str,), (int, float)
KEYS = {
    "columns": {"product": TEXT, "segments": (list,), "price": TEXT, "volume": TEXT, "date": TEXT, "weight": TEXT,
                "sep": TEXT},
    "fit": {"degrees": (str, list), "loglog": (bool,), "semilog": (bool,), "folds": (int, str), "fold_order": TEXT, "seed": (int,),
            "rule": TEXT, "plan_price": NUMBER, "plan": TEXT},
    "thresholds": {name: NUMBER for name in Thresholds.names()},
    "units": {"price": TEXT, "volume": TEXT},
}
KIND_NAMES = {str: "text", list: "a list", bool: "true or false", int: "a whole number", float: "a number"}


def load_config(path: Path | None, *, cwd: Path | None = None) -> dict:
    """The settings file's tables (``{}`` when there is none).  ``path`` None: ``pricefold.toml`` in ``cwd``."""
    if path is None:
        path = (cwd or Path.cwd()) / DEFAULT_NAME
        if not path.exists():
            return {}
    elif not path.exists():
        raise SettingsError(f"{path}: settings file not found")
    try:
        document = tomllib.loads(path.read_text(encoding="utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise SettingsError(f"{path}: not valid TOML ({exc})") from None
    for table, values in document.items():
        if table not in KEYS:
            raise SettingsError(f"{path}: unknown table [{table}]; expected one of "
                                f"{', '.join(f'[{t}]' for t in KEYS)}")
        if not isinstance(values, dict):
            raise SettingsError(f"{path}: {table} must be a table, like [{table}]")
        for key, value in values.items():
            if key not in KEYS[table]:
                raise SettingsError(f"{path}: unknown key {key!r} in [{table}]; expected one of "
                                    f"{', '.join(sorted(KEYS[table]))}")
            kinds = KEYS[table][key]
            if isinstance(value, bool) and bool not in kinds or not isinstance(value, kinds):
                wanted = " or ".join(KIND_NAMES[k] for k in kinds)
                raise SettingsError(f"{path}: [{table}] {key} should be {wanted}, got {value!r}")
    document["_path"] = str(path)
    return document


def pick(cli_value, config: dict, table: str, key: str, default):
    """The command line's value if given, else the settings file's, else the default."""
    if cli_value is not None:
        return cli_value
    return config.get(table, {}).get(key, default)
