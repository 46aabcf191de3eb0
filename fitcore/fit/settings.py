"""Fit settings: one table declares every option once; ``FitSettings`` and the settings-file keys come
from it (and the command line's options, in ``pricefold/options.py``).  The fold scheme the settings
make (``folds.fold_scheme``) checks what only the options together say.

Each ``Option`` names its default, its help, where it lives in the settings file (table and key),
its command-line flag, and how a value is read and checked (``read``: a value as typed or as the file
holds it → the value, or ``Invalid`` saying what was expected).  Adding an option is one row here,
plus the code that uses it.  Precedence when resolving: command line > settings file > default.
"""
from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field, fields, make_dataclass
from pathlib import Path
from typing import Callable

from ..data.columns import LARGEST, Columns
from ..errors import SettingsError

MAX_DEGREE = 5
FOLD_ORDERS = ("shuffled", "given", "time")  # folds.ORDERS, named here for the options (a test keeps them equal)
RULES = ("one-se", "lowest")  # selection.RULES, likewise


class Invalid(ValueError):
    """A value that does not fit its option; the message is what was expected (a noun phrase)."""


# -- readers: a raw value (text from the command line, or a TOML value) → the option's value ---------------

def _text(value) -> str:
    if not isinstance(value, str) or not value.strip():
        raise Invalid("a column name")
    return value


def _optional_text(value) -> str | None:
    return None if value is None else _text(value)


def _names(value) -> tuple[str, ...]:
    if isinstance(value, str) or not isinstance(value, (list, tuple)):
        raise Invalid("a list of column names, like [\"region\"]")
    if not all(isinstance(v, str) and v.strip() for v in value):
        raise Invalid("a list of column names, like [\"region\"]")
    return tuple(value)


def _separator(value) -> str | None:
    if value is None:
        return None
    text = {"\\t": "\t", "tab": "\t"}.get(value, value) if isinstance(value, str) else value
    if not isinstance(text, str) or len(text) != 1 or text in "\"\r\n":
        raise Invalid("one character other than a quote or a line break (\\t for tab)")
    return text


def _degrees(value) -> tuple[int, ...]:
    expected = f"whole numbers from 0 to {MAX_DEGREE} in increasing order, like 0-5, 1,3 or [1, 2, 3]"
    try:
        if isinstance(value, str):
            if "-" in value.strip()[1:]:
                lo, hi = (int(part) for part in value.split("-", 1))
                if lo > hi:
                    raise Invalid(expected)
                degrees = tuple(range(lo, hi + 1))
            else:
                degrees = tuple(sorted({int(part) for part in value.split(",")}))
        elif isinstance(value, (list, tuple)) and all(isinstance(v, int) and not isinstance(v, bool) for v in value):
            degrees = tuple(value)
        else:
            raise Invalid(expected)
    except ValueError:
        raise Invalid(expected) from None
    if not degrees or degrees[0] < 0 or degrees[-1] > MAX_DEGREE or list(degrees) != sorted(set(degrees)):
        raise Invalid(expected)
    return degrees


def _boolean(value) -> bool:
    if not isinstance(value, bool):
        raise Invalid("true or false")
    return value


def _folds(value) -> int | str:
    expected = "a whole number of at least 2 or 'loo'"
    if isinstance(value, str):
        if value.strip().lower() == "loo":
            return "loo"
        try:
            value = int(value)
        except ValueError:
            raise Invalid(expected) from None
    if isinstance(value, bool) or not isinstance(value, int) or value < 2:
        raise Invalid(expected)
    return value


def _choice(options: tuple[str, ...]) -> Callable:
    def read(value) -> str:
        if value not in options:
            raise Invalid("one of " + ", ".join(options))
        return value
    return read


SEEDS = 2 ** 64  # the shuffle's seed is 64 bits (``shuffle.row_draws``): a larger one would wrap round


def _seed(value) -> int:
    expected = f"a whole number from 0 to {SEEDS - 1} (2⁶⁴ − 1)"
    if isinstance(value, str):
        try:
            value = int(value)
        except ValueError:
            raise Invalid(expected) from None
    if isinstance(value, bool) or not isinstance(value, int) or not 0 <= value < SEEDS:
        raise Invalid(expected)
    return value


def _season(value) -> int:
    if isinstance(value, str):
        try:
            value = int(value)
        except ValueError:
            raise Invalid("a whole number from 0 to 4") from None
    if isinstance(value, bool) or not isinstance(value, int) or not 0 <= value <= 4:
        raise Invalid("a whole number from 0 to 4")
    return value


def _level(value) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not 0.5 < value < 1:
        raise Invalid("a level between 0.5 and 1")
    return float(value)


def _price(value) -> float | None:
    if value is None:
        return None
    try:
        price = float(value) if not isinstance(value, bool) else math.nan
    except (TypeError, ValueError):
        price = math.nan
    if not price > 0:  # NaN too
        raise Invalid("a number above zero")
    if price > LARGEST:  # inf too: "above zero" was all it said of 1e400  # as a plan file's price is refused (``plan_checks``), in the same words
        raise Invalid(f"a price of at most {LARGEST:.0e}".replace("e+", "e"))
    return price


def _path(value) -> Path | None:
    if value is None:
        return None
    if not isinstance(value, (str, Path)) or not str(value).strip():
        raise Invalid("a file name")
    return Path(value)


# -- the table ----------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Option:
    """One setting, declared once.

    ``group``: what it sets — ``fit`` (a ``FitSettings`` field), ``columns`` (a ``Columns`` field or the
    delimiter) or ``plan``.  ``table``: its settings-file table (None: not in the file; the key is ``name``).
    ``flag``: its command-line option (None: none); ``action`` as argparse's (``append`` for repeatable
    options, ``store_true``/``store_false`` for switches).  ``kinds``: the TOML value types accepted.
    """

    name: str
    group: str
    default: object
    help: str
    read: Callable
    table: str | None = None
    flag: str | None = None
    metavar: str | None = None
    action: str = "store"
    choices: tuple | None = None
    kinds: tuple = (str,)

    def value(self, raw, where: str | None = None):
        """``raw`` read and checked; ``where`` names its source in the message (default: the flag)."""
        try:
            return self.read(raw)
        except Invalid as exc:
            shown = raw if where is None and isinstance(raw, str) else repr(raw)
            if where is None:
                raise SettingsError(f"expected {self.flag or self.name} to be {exc}, got {shown}") from None
            raise SettingsError(f"{where} should be {exc}, got {shown}") from None


_FIT, _COLUMNS, _PLAN = "fit", "columns", "plan"
OPTIONS: tuple[Option, ...] = (
    Option("product", _COLUMNS, Columns.product, "product column (default: product)", _text, "columns",
           "--product", "COL"),
    Option("segments", _COLUMNS, Columns.segments, "a column that splits a product into series (repeatable), "
           "e.g. region", _names, "columns", "--segment", "COL", action="append", kinds=(list,)),
    Option("price", _COLUMNS, Columns.price, "price column (default: price)", _text, "columns", "--price", "COL"),
    Option("volume", _COLUMNS, Columns.volume, "volume column (default: volume)", _text, "columns", "--volume",
           "COL"),
    Option("date", _COLUMNS, Columns.date, "date column, ISO dates (needed by --fold-order time; repeats of a "
           "series and date are rejected)", _optional_text, "columns", "--date", "COL"),
    Option("weight", _COLUMNS, Columns.weight, "observation weights ≥ 0: weighted least squares throughout",
           _optional_text, "columns", "--weight", "COL"),
    Option("controls", _COLUMNS, Columns.controls, "a numeric or 0/1 column (a promotion or holiday flag, a "
           "display, a competitor's price) held fixed while every curve is fitted (repeatable)", _names, "columns",
           "--control", "COL", action="append", kinds=(list,)),
    Option("sep", _COLUMNS, None, "field separator, one character; \\t for tab (default: found from the header)",
           _separator, "columns", "--sep", "CHAR"),
    Option("degrees", _FIT, tuple(range(MAX_DEGREE + 1)), "polynomial degrees to try, e.g. 1-3 or 1,3 "
           "(default: 0-5)", _degrees, "fit", "--degrees", "A-B", kinds=(str, list)),
    Option("loglog", _FIT, True, "leave out the constant-elasticity curve ln volume = a + e·ln price", _boolean,
           "fit", "--no-loglog", action="store_false", kinds=(bool,)),
    Option("semilog", _FIT, False, "add the semi-log curve ln volume = a + b·price", _boolean, "fit",
           "--semilog", action="store_true", kinds=(bool,)),
    Option("folds", _FIT, 5, "number of folds, or loo (default: 5)", _folds, "fit", "--folds", "K|loo",
           kinds=(int, str)),
    Option("fold_order", _FIT, "shuffled", "deal rows into folds shuffled (seeded), in file order, or by date "
           "(default: shuffled)", _choice(FOLD_ORDERS), "fit", "--fold-order", choices=FOLD_ORDERS),
    Option("seed", _FIT, 0, "seed of the fold shuffle (default: 0)", _seed, "fit", "--seed", "N", kinds=(int,)),
    Option("rule", _FIT, "one-se", "one-se: simplest within one standard error of the best; lowest: lowest CV "
           "error (default: one-se)", _choice(RULES), "fit", "--rule", choices=RULES),
    Option("season", _FIT, 0, "K sine/cosine pairs of the day of the year held fixed as controls, 0 to 4 (needs "
           "--date; default: 0)", _season, "fit", "--season", "K", kinds=(int,)),
    Option("level", _FIT, 0.95, "level of the prediction intervals", _level),
    Option("plan_price", _PLAN, None, "one plan price for every series", _price, "fit", "--plan-price", "P",
           kinds=(int, float)),
    Option("plan", _PLAN, None, "plan prices per series: the key columns and plan_price", _path, "fit", "--plan",
           "FILE"),
)
BY_NAME = {option.name: option for option in OPTIONS}


def file_keys() -> dict[str, dict[str, tuple]]:
    """The settings-file tables and their keys, each with the TOML value types it accepts."""
    out: dict[str, dict[str, tuple]] = {}
    for option in OPTIONS:
        if option.table:
            out.setdefault(option.table, {})[option.name] = option.kinds
    return out


# -- FitSettings, made from the table -------------------------------------------------------------------------

def _post_init(self) -> None:
    """Every field read and checked by its option (so ``folds="5"`` becomes 5), then the fold scheme they
    make (which refuses the pairs that clash, such as ``loo`` with an order)."""
    for option in OPTIONS:
        if option.group == _FIT:
            object.__setattr__(self, option.name, option.value(getattr(self, option.name)))
    from .folds import fold_scheme  # numpy: not at ``import fitcore``
    fold_scheme(self)


def _as_dict(self) -> dict:
    out = asdict(self)
    out.pop("extra")
    out["degrees"] = list(self.degrees)
    return out | dict(self.extra)


FitSettings = make_dataclass(
    "FitSettings",
    [(o.name, object, field(default=o.default)) for o in OPTIONS if o.group == _FIT]
    + [("extra", dict, field(default_factory=dict, compare=False))],
    frozen=True, namespace={"__post_init__": _post_init, "as_dict": _as_dict})
FitSettings.__module__ = __name__  # picklable by name (the Dask engine sends settings to workers)
FitSettings.__doc__ = ("Everything that decides how series are fitted and a candidate chosen (frozen, validated): "
                       + "; ".join(f"``{o.name}`` ({o.default!r})" for o in OPTIONS if o.group == _FIT)
                       + ". ``extra``: what a results file records beyond them (columns, plan, thresholds, "
                       "settings file).  Declared in ``OPTIONS``.")


def provenance(columns: dict, plan_file: str | None, plan_price: float | None) -> dict:
    """What a results file records beyond the fit settings, so the same fit can be made again."""
    plan = {"file": plan_file} if plan_file else {"price": plan_price} if plan_price is not None else None
    return {"columns": columns, "plan": plan}


def settings_from_dict(values: dict) -> FitSettings:
    """The ``FitSettings`` recorded in a results file (defaults for options it predates; the rest in ``extra``)."""
    known = {f.name for f in fields(FitSettings)} - {"extra"}
    given = {name: values[name] for name in known if name in values}
    if "degrees" in given:
        given["degrees"] = tuple(given["degrees"])
    return FitSettings(**given, extra={k: v for k, v in values.items() if k not in known})
