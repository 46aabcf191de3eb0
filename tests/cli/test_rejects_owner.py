"""A fit replaces or removes ``NAME.rejects.csv`` only when it is the rejects file of the results it replaces (their
``input.rejects_sha256``).  A trial found: a clean run deleted any file of that name whose header ended in
``line,reason`` — a hand-made list, an annotated rejects file —, and ``-o fit.parquet`` deleted or overwrote the
rejects file of ``fit.json`` beside it (both name ``fit.rejects.csv``)."""
from __future__ import annotations

import hashlib
import json
import shutil
from pathlib import Path

import pytest

from pricefold.cli import main

SAMPLE = Path(__file__).resolve().parents[2] / "sample"
SERIES = ["--segment", "region", "--date", "week"]


@pytest.fixture
def files(tmp_path):
    shutil.copyfile(SAMPLE / "wholesale.csv", tmp_path / "clean.csv")
    lines = (SAMPLE / "wholesale.csv").read_text().splitlines(keepends=True)
    lines[4] = lines[4].replace(",2.", ",abc", 1)  # one row's price not a number
    (tmp_path / "bad.csv").write_text("".join(lines))
    return tmp_path


def fit(folder: Path, data: str, out: str, capsys) -> tuple[int, str]:
    capsys.readouterr()
    code = main(["fit", str(folder / data), *SERIES, "-o", str(folder / out), "-q"])
    return code, capsys.readouterr().err


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_a_clean_run_leaves_a_list_it_did_not_write(files, capsys):
    mine = files / "cycle.rejects.csv"
    mine.write_text("sku,line,reason\nA-17,3,rows to chase with the supplier\n")
    before = mine.read_bytes()
    code, err = fit(files, "clean.csv", "cycle.json", capsys)
    assert code == 0 and mine.read_bytes() == before
    assert f"note: {mine} left as it was: no pricefold results at {files / 'cycle.json'} record it" in err
    code, err = fit(files, "bad.csv", "cycle.json", capsys)  # rejected rows to write there: refused first
    assert code == 2 and mine.read_bytes() == before and "nothing was written" in err
    assert json.loads((files / "cycle.json").read_text())["input"]["rejected"] == 0  # the clean run's, as it was


def test_an_edited_rejects_file_is_no_longer_the_runs_own(files, capsys):
    assert fit(files, "bad.csv", "r.json", capsys)[0] == 0
    rejects = files / "r.rejects.csv"
    with open(rejects, "a") as handle:
        handle.write("my note: chase line 5\n")
    before = rejects.read_bytes()
    code, err = fit(files, "clean.csv", "r.json", capsys)
    assert code == 0 and rejects.read_bytes() == before
    assert f"it is not the rejects file {files / 'r.json'} records (changed since, or another run's)" in err


def test_results_sharing_a_rejects_name_keep_each_others_file(files, capsys):
    assert fit(files, "bad.csv", "fit.json", capsys)[0] == 0
    rejects = files / "fit.rejects.csv"
    theirs = digest(rejects)
    assert json.loads((files / "fit.json").read_text())["input"]["rejects_sha256"] == theirs
    assert fit(files, "clean.csv", "fit.parquet", capsys)[0] == 0
    assert digest(rejects) == theirs  # before: removed
    code, err = fit(files, "bad.csv", "fit.parquet", capsys)
    assert code == 2 and digest(rejects) == theirs and "choose another results name" in err  # before: overwritten


def test_the_replaced_results_own_rejects_are_replaced_then_removed(files, capsys):
    for out in ("own.json", "own.parquet"):
        assert fit(files, "bad.csv", out, capsys)[0] == 0
        assert fit(files, "bad.csv", out, capsys)[0] == 0  # its own: replaced
        code, err = fit(files, "clean.csv", out, capsys)
        assert code == 0 and not (files / "own.rejects.csv").exists() and "left as it was" not in err, out
