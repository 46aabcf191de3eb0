"""The fit and column options of ``fit`` and ``triage``, made from the one table of settings
(``fitcore.fit.settings.OPTIONS``), and their resolution: command line > settings file > default.

Every value is read by its option's own reader, whichever way it came, so ``--folds 1`` and
``folds = 1`` in ``pricefold.toml`` are refused by the same check, each message naming where the value
came from.
"""
from __future__ import annotations

import argparse
from dataclasses import dataclass, replace
from pathlib import Path


@dataclass(frozen=True)
class Resolved:
    """Everything a fit needs from the options: what to read, how to fit, the plan, the flags' thresholds."""

    columns: object  # fitcore.data.columns.Columns
    sep: str | None
    settings: object  # FitSettings, its ``extra`` recording columns, plan, thresholds and settings file
    plan_file: Path | None
    plan_price: float | None
    thresholds: object  # Thresholds
    config_path: str | None

    @property
    def inputs(self) -> list[tuple[str, Path | None]]:
        """The files these options name, as the output guard wants them."""
        return [("the plan file", self.plan_file), ("the settings file", self.config_path and Path(self.config_path))]


def _add(group, option) -> None:
    if option.action in ("store_true", "store_false"):
        group.add_argument(option.flag, dest=option.name, action="store_const", const=option.action == "store_true",
                           default=None, help=option.help)
    else:
        group.add_argument(option.flag, dest=option.name, action=option.action, default=None, metavar=option.metavar,
                           choices=option.choices, help=option.help)


def add_column_options(parser: argparse.ArgumentParser) -> None:
    from fitcore.fit.settings import OPTIONS
    group = parser.add_argument_group("columns")
    for option in OPTIONS:
        if option.group == "columns" and option.flag:
            _add(group, option)


def add_fit_options(parser: argparse.ArgumentParser) -> None:
    from fitcore.fit.settings import OPTIONS
    group = parser.add_argument_group("fitting")
    group.add_argument("--config", type=Path, default=None, metavar="FILE",
                       help="settings file (default: pricefold.toml in the current folder, if there is one)")
    plan = group.add_mutually_exclusive_group()
    for option in OPTIONS:
        if option.flag and option.group in ("fit", "plan"):
            _add(plan if option.group == "plan" else group, option)
    group.add_argument("--threshold", action="append", default=[], metavar="NAME=VALUE",
                       help="override a flag threshold, e.g. min_points=8 (repeatable)")


UNIT_KEYS = {"price": (str,), "volume": (str,)}  # [units]: labels only, for the triage screen


def settings_file_keys() -> dict[str, dict[str, tuple]]:
    """Every table and key of the settings file: the settings table's, the flag thresholds, the units."""
    from fitcore.fit.settings import file_keys
    from fitcore.review.thresholds import Thresholds
    return file_keys() | {"thresholds": {name: (int, float) for name in Thresholds.names()}, "units": UNIT_KEYS}


def resolve(args) -> Resolved:
    """The options of ``args`` (a parsed ``fit`` or ``triage`` command line) with the settings file's and
    the defaults filled in, every value checked."""
    from fitcore.data.columns import Columns, check_roles
    from fitcore.data.config import load_config
    from fitcore.errors import SettingsError
    from fitcore.fit.controls import check_season
    from fitcore.fit.folds import check_time_order
    from fitcore.fit.settings import OPTIONS, FitSettings, provenance
    from fitcore.review.thresholds import Thresholds, parse_threshold_options

    config = load_config(args.config, settings_file_keys())
    where = config.get("_path")
    plan_given = getattr(args, "plan", None) is not None or getattr(args, "plan_price", None) is not None
    fit_file = config.get("fit", {})
    if not plan_given and "plan" in fit_file and "plan_price" in fit_file:
        raise SettingsError(f"{where}: [fit] has both plan and plan_price; keep one")
    values = {}
    for option in OPTIONS:
        given = getattr(args, option.name, None)
        if given is not None:
            values[option.name] = option.value(given)
        elif option.table and option.name in config.get(option.table, {}) and not (option.group == "plan" and plan_given):
            values[option.name] = option.value(config[option.table][option.name], f"{where}: [{option.table}] {option.name}")
        else:
            values[option.name] = option.default
    columns = Columns(**{name: values[name] for name in ("product", "segments", "price", "volume", "date", "weight")},
                      controls=tuple(dict.fromkeys(values["controls"])))
    check_time_order(values["fold_order"], columns.date is not None)
    check_roles(columns)
    check_season(values["season"], columns.date is not None)
    settings = FitSettings(**{o.name: values[o.name] for o in OPTIONS if o.group == "fit"})
    plan_file, plan_price = values["plan"], values["plan_price"]
    overrides = {k: v for k, v in config.get("thresholds", {}).items()}
    overrides.update(parse_threshold_options(getattr(args, "threshold", []) or []))
    thresholds = Thresholds().with_overrides(overrides)
    extra = provenance(columns.as_dict(), str(plan_file.resolve()) if plan_file else None, plan_price)
    if where:
        extra["config"] = where
    return Resolved(columns, values["sep"], replace(settings, extra=extra), plan_file, plan_price, thresholds, where)


class OneOutput(argparse.Action):
    """``-o``/``--output``: a path, given once (argparse kept the last of two silently: ``-o a.json -o b.json``
    wrote b.json)."""

    def __call__(self, parser, namespace, values, option_string=None):
        if getattr(namespace, self.dest, None) is not None:
            parser.error(f"{option_string} given twice ({getattr(namespace, self.dest)} and {values}): name one output")
        setattr(namespace, self.dest, Path(values))


class OneFile(OneOutput):
    """``OneOutput`` naming a file: a path ending in a slash names a folder, which argparse's ``Path`` dropped
    (``-o page.html/`` wrote the file page.html).  (``fit``'s may be a Dask results folder.)"""

    def __call__(self, parser, namespace, values, option_string=None):
        if str(values).endswith(("/", "\\")):
            parser.error(f"{option_string} {values}: a path ending in a slash names a folder; name the file to write")
        super().__call__(parser, namespace, values, option_string)
