"""The command line's basics: ``--version``, defaults in ``--help``, mistakes pointed at the subcommand's own
``--help``, and Dask's options refused without ``--engine dask``."""
from __future__ import annotations

from importlib.metadata import version
from pathlib import Path

import pytest

from fitcore.fit.settings import OPTIONS
from pricefold.cli import main


def test_version_prints_the_package_version(capsys):
    with pytest.raises(SystemExit) as done:
        main(["--version"])
    assert done.value.code == 0
    assert capsys.readouterr().out == f"pricefold {version('pricefold')}\n"


def test_every_option_with_a_value_says_its_default_in_the_help():
    """Trials found ``fit --help`` silent on the default of ``--rule``."""
    valued = [o for o in OPTIONS if o.flag and o.action not in ("store_true", "store_false", "append")
              and o.default is not None]
    assert "rule" in [o.name for o in valued]
    assert [o.flag for o in valued if "default:" not in o.help] == []


@pytest.mark.parametrize("argv, command", [
    (["fit", "x.csv", "-o", "y.json", "--bogus"], "pricefold fit"),
    (["show", "r.json", "extra"], "pricefold show"),
    (["ledger", "carry", "r.json", "--ledger", "l.jsonl", "--bogus"], "pricefold ledger carry"),
])
def test_an_unknown_argument_points_at_its_subcommands_help(capsys, argv, command):
    with pytest.raises(SystemExit) as done:
        main(argv)
    assert done.value.code == 2
    err = capsys.readouterr().err
    assert err.startswith(f"{command}: unrecognized arguments: ") and err.endswith(f"(see {command} --help)\n"), err
    assert err.count("\n") == 1


@pytest.mark.parametrize("option", [["--workers", "3"], ["--partitions", "4"], ["--scheduler", "tcp://h:8786"]])
def test_dasks_options_without_engine_dask_are_refused_in_one_line(tmp_path, capsys, option):
    data = tmp_path / "d.csv"
    data.write_text("product,price,volume\na,1,2\n")
    assert main(["fit", str(data), "-o", str(tmp_path / "r.json"), *option]) == 2
    err = capsys.readouterr().err
    assert err == (f"pricefold fit: {option[0]} is an option of --engine dask; add --engine dask, or leave it out "
                   "to fit on this machine\n")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["d.csv"]


SAMPLE = Path(__file__).resolve().parents[2] / "sample"


@pytest.mark.parametrize("argv", [
    ["fit", "bad\udcffdir/wholesale.csv", "-o", "{tmp}/r.json"],
    ["fit", str(SAMPLE / "wholesale.csv"), "-o", "{tmp}/o\udcff.parquet"],
    ["fit", str(SAMPLE / "wholesale.csv"), "-o", "{tmp}/r.json", "--ledger", "{tmp}/L\udcff.jsonl"]])
def test_a_name_with_bytes_that_are_not_utf8_is_one_line(tmp_path, capsys, argv):
    """A file name of Latin-1 bytes (``$'bad\\xffdir'``) reaches Python as a lone surrogate: pyarrow and the results'
    JSON failed on it with a traceback.  Refused in one line, naming it, nothing written."""
    argv = [part.replace("{tmp}", str(tmp_path)) for part in argv]
    assert main(argv) == 2
    [line] = capsys.readouterr().err.splitlines()
    assert line.startswith("pricefold fit: '") and "⟨U+DCFF⟩" in line and "holds bytes that are not UTF-8" in line
    assert list(tmp_path.iterdir()) == []


def test_a_line_break_in_a_file_name_stays_on_the_error_s_one_line(tmp_path, capsys):
    assert main(["ledger", "verify", str(tmp_path / "L\nx.jsonl")]) == 2
    assert capsys.readouterr().err == f"pricefold ledger: {tmp_path}/L␊x.jsonl: file not found\n"
