"""The demo's edges: no terminal, an interrupted fit, and the commands it says to run next."""
from __future__ import annotations

import os
import subprocess
import sys
from argparse import Namespace
from pathlib import Path

import pytest

from pricefold import demo

ROOT = Path(__file__).resolve().parents[2]


def test_without_a_terminal_the_demo_writes_nothing_and_says_so_in_one_line(tmp_path):
    """Before: it wrote the results, printed "(refitted behind the screen)" though no screen opened, then exit 2."""
    folder = tmp_path / "d"
    done = subprocess.run([sys.executable, "-m", "pricefold", "demo", "--dir", str(folder)], stdin=subprocess.DEVNULL,
                          capture_output=True, text=True, cwd=tmp_path, timeout=300,
                          env={**os.environ, "PYTHONPATH": str(ROOT)})  # this checkout's pricefold
    assert done.returncode == 2, done.stderr
    assert done.stderr.startswith("pricefold demo: the demo, which ends in the triage screen, needs a terminal")
    assert done.stderr.count("\n") == 1 and "refitted" not in done.stderr
    assert not folder.exists()


@pytest.mark.parametrize("existed", [False, True])
def test_an_interrupted_demo_removes_the_empty_folder_it_made_and_never_one_that_existed(tmp_path, monkeypatch,
                                                                                          existed):
    """Before: Ctrl+C during ``--control``'s fit said "nothing was written" and left the empty folder it made."""
    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt
    monkeypatch.setattr("fitcore.results.source.fit_source", interrupted)
    monkeypatch.setattr("pricefold.terminal.require_terminal", lambda what: None, raising=False)
    folder = tmp_path / "d3" / "inner"
    if existed:
        folder.mkdir(parents=True)
    args = Namespace(dir=folder, analyst=None, control=["promo"], season=3)
    with pytest.raises(KeyboardInterrupt):
        demo.run_demo(args, lambda *a, **kw: 0)
    assert folder.is_dir() == existed and (tmp_path / "d3").is_dir() == existed
    assert [p.name for p in tmp_path.iterdir()] == (["d3"] if existed else [])


def test_the_commands_the_demo_says_to_run_next_run_from_where_it_was_run(tmp_path, monkeypatch, capsys):
    """Before: bare 'pricefold …', which the README's setup (.venv/bin/pricefold) does not put on PATH."""
    here = Path(sys.executable).parent / "pricefold"
    monkeypatch.chdir(tmp_path)
    monkeypatch.setenv("PATH", "/usr/bin:/bin")  # no environment activated
    demo._report_hint(tmp_path / "results.parquet", tmp_path)
    said = capsys.readouterr().err
    assert f"back to it: {here} triage {tmp_path / 'results.parquet'} --ledger" in said, said
    assert f"{here} report " in said
    monkeypatch.setenv("PATH", f"{here.parent}:/usr/bin:/bin")  # activated: pricefold is on PATH
    demo._report_hint(tmp_path / "results.parquet", tmp_path)
    assert "back to it: pricefold triage " in capsys.readouterr().err


def test_a_demo_interrupted_after_its_results_are_in_place_says_so(tmp_path, monkeypatch, capsys):
    """Ctrl+C once the shipped results were placed, before the screen: it said "nothing was written" and left
    ``results.parquet`` (an operations trial).  Now: "after writing …/results.parquet in full", exit 130."""
    from pricefold import cli

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt
    monkeypatch.setattr("pricefold.terminal.require_terminal", lambda what: None, raising=False)
    monkeypatch.setattr("pricefold.triage_cli.open_triage", interrupted)
    folder = tmp_path / "demo"
    assert cli.main(["demo", "--dir", str(folder)]) == 130
    assert (folder / "results.parquet").is_file()
    assert capsys.readouterr().err.splitlines()[-1] == (
        f"pricefold demo: interrupted; after writing {folder / 'results.parquet'} in full")


@pytest.mark.parametrize("analyst", [None, "ana", "ana o'neil; rm -rf ~"])
def test_the_way_back_to_the_demo_names_the_analyst_it_was_given(tmp_path, monkeypatch, capsys, analyst):
    """A trial: `pricefold demo --analyst ana` said `back to it: pricefold triage … --ledger …`, and following it
    recorded under the OS user.  The line, split as a shell splits it, now runs triage as the demo's analyst; without
    `--analyst` it names none (the OS user, as the demo was)."""
    import shlex

    from pricefold import cli, triage_cli
    opened = []
    monkeypatch.setattr(triage_cli, "open_triage", lambda source, ledger, who, **kwargs: opened.append(who) or 0)
    monkeypatch.setattr("pricefold.terminal.require_terminal", lambda what: None)  # its screen is stubbed
    folder = tmp_path / "my demo"  # a space: the paths quoted too
    named = ["--analyst", analyst] if analyst is not None else []
    assert cli.main(["demo", "--dir", str(folder), *named]) == 0
    line = next(line for line in capsys.readouterr().err.splitlines() if line.startswith("back to it: "))
    again = cli.build_parser().parse_args(shlex.split(line.split(": ", 1)[1])[1:])
    assert again.command == "triage" and again.ledger == folder / "ledger.jsonl"
    assert str(again.source) == str(folder / "results.parquet")
    assert again.analyst == analyst == opened[0]
