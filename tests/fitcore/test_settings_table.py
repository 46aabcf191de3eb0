"""One table of settings: the command line, the settings file and ``FitSettings`` all come from it."""
from __future__ import annotations

import argparse
from dataclasses import fields

import pytest

from fitcore.data.columns import Columns
from fitcore.errors import SettingsError
from fitcore.fit.settings import OPTIONS, FitSettings, file_keys, settings_from_dict
from pricefold.cli import build_parser
from pricefold.options import add_column_options, add_fit_options, resolve


def flags_of(parser: argparse.ArgumentParser) -> set[str]:
    return {flag for action in parser._actions for flag in action.option_strings}


def command(name: str) -> argparse.ArgumentParser:
    sub = next(a for a in build_parser()._actions if isinstance(a, argparse._SubParsersAction))
    return sub.choices[name]


def test_fit_and_triage_offer_every_option_of_the_table():
    declared = {o.flag for o in OPTIONS if o.flag}
    assert "--semilog" in declared and "--no-loglog" in declared
    for name in ("fit", "triage"):
        assert declared <= flags_of(command(name)), name


def test_settings_file_keys_and_fitsettings_fields_are_the_tables():
    keys = file_keys()
    assert set(keys) == {"columns", "fit"}
    assert set(keys["fit"]) == {"degrees", "loglog", "semilog", "folds", "fold_order", "seed", "rule", "season",
                                "plan_price", "plan"}
    assert set(keys["columns"]) == {"product", "segments", "price", "volume", "date", "weight", "sep", "controls"}
    assert [f.name for f in fields(FitSettings)] == [o.name for o in OPTIONS if o.group == "fit"] + ["extra"]


def test_defaults_are_written_once():
    made = FitSettings()
    for option in OPTIONS:
        if option.group == "fit":
            assert getattr(made, option.name) == option.default
        if option.group == "columns" and option.name != "sep":
            assert getattr(Columns(), option.name) == option.default  # the table takes Columns' own defaults
    assert made.semilog is False and made.folds == 5 and made.degrees == (0, 1, 2, 3, 4, 5)


def parse(argv, tmp_path, config: str | None = None):
    parser = argparse.ArgumentParser()
    add_column_options(parser)
    add_fit_options(parser)
    if config is not None:
        (tmp_path / "s.toml").write_text(config)
        argv = [*argv, "--config", str(tmp_path / "s.toml")]
    return resolve(parser.parse_args(argv))


def test_the_command_line_wins_over_the_file_and_the_file_over_the_defaults(tmp_path):
    run = parse(["--folds", "3", "--sep", "\\t"], tmp_path,
                '[fit]\nfolds = 4\nrule = "lowest"\nsemilog = true\n[columns]\nsegments = ["region"]\n')
    assert run.settings.folds == 3 and run.settings.rule == "lowest" and run.settings.semilog is True
    assert run.columns.segments == ("region",) and run.sep == "\t" and run.settings.seed == 0
    assert run.settings.extra["config"].endswith("s.toml")


@pytest.mark.parametrize("flag, key, value, phrase", [
    ("--folds", "folds", "1", "a whole number of at least 2 or 'loo'"),
    ("--seed", "seed", "-1", "a whole number from 0 to 18446744073709551615"),
    ("--seed", "seed", "18446744073709551616", "a whole number from 0 to 18446744073709551615"),  # wrapped to 0
    ("--plan-price", "plan_price", "1e300", "a price of at most 1e15"),  # as a plan file's
    ("--degrees", "degrees", '"9"', "whole numbers from 0 to 5"),
    ("--plan-price", "plan_price", "nan", "a number above zero"),
    ("--plan-price", "plan_price", "inf", "a price of at most 1e15"),  # not "above zero" (a trial)
    ("--sep", "sep", '";;"', "one character other than a quote or a line break"),
])
def test_a_value_is_refused_by_the_same_check_from_either_place(tmp_path, flag, key, value, phrase):
    table = "columns" if key == "sep" else "fit"
    with pytest.raises(SettingsError, match=f"expected {flag} to be {phrase}"):
        parse([flag, value.strip('"')], tmp_path)
    with pytest.raises(SettingsError, match=rf"s.toml: \[{table}\] {key} should be {phrase}"):
        parse([], tmp_path, f"[{table}]\n{key} = {value}\n")


def test_time_ordered_folds_need_a_date_from_either_place(tmp_path):
    for argv, config in ((["--fold-order", "time"], None), ([], '[fit]\nfold_order = "time"\n')):
        with pytest.raises(SettingsError, match="--fold-order time needs the date column"):
            parse(argv, tmp_path, config)
    assert parse(["--fold-order", "time", "--date", "week"], tmp_path).settings.fold_order == "time"


def test_plan_and_plan_price_in_the_file_clash_unless_the_command_line_picks(tmp_path):
    config = '[fit]\nplan_price = 2.0\nplan = "plan.csv"\n'
    with pytest.raises(SettingsError, match="both plan and plan_price"):
        parse([], tmp_path, config)
    assert parse(["--plan-price", "3"], tmp_path, config).plan_price == 3.0


def test_results_written_before_an_option_existed_read_back_with_its_default():
    old = {"degrees": [0, 1], "loglog": True, "folds": 5, "fold_order": "given", "seed": 0, "rule": "one-se",
           "level": 0.95, "columns": {"product": "product"}}
    settings = settings_from_dict(old)
    assert settings.semilog is False and settings.degrees == (0, 1) and settings.extra == {"columns": {"product": "product"}}


def test_fitsettings_can_be_sent_to_a_worker():
    import pickle
    settings = FitSettings(folds="loo", extra={"plan": None})
    assert pickle.loads(pickle.dumps(settings)) == settings  # picklable by its module path


def test_the_tables_choices_are_the_engines():
    from fitcore.fit import folds, selection, settings
    assert settings.FOLD_ORDERS == folds.ORDERS and set(settings.RULES) == set(selection.RULES)
