"""The sample's shipped results name their data and plan files relatively: read beside the results file,
from whatever folder the command runs in (``pricefold triage sample/results.parquet`` said the data file
was not found unless run from inside ``sample/``)."""
from __future__ import annotations

from pathlib import Path

from fitcore.data.columns import file_sha256
from fitcore.results.read import read_header
from fitcore.results.source import source_from_results

SAMPLE = Path(__file__).parents[2] / "sample"


def test_relative_names_are_read_beside_the_results_file(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)  # neither wholesale.csv nor plan.csv is here
    recorded = read_header(SAMPLE / "results.parquet")
    assert not Path(recorded["input"]["path"]).is_absolute()  # the shipped file names them relatively
    source = source_from_results(SAMPLE / "results.parquet")
    assert source.found and source.data.samefile(SAMPLE / "wholesale.csv")
    assert source.plan_file.samefile(SAMPLE / "plan.csv")
    assert file_sha256(source.data) == recorded["input"]["sha256"] and source.warnings == []


def test_absolute_names_stay_as_recorded(tmp_path):
    import subprocess
    import sys
    out = tmp_path / "r.parquet"
    subprocess.run([sys.executable, "-m", "pricefold", "fit", str(SAMPLE / "wholesale.csv"), "--segment", "region",
                    "--date", "week", "--plan", str(SAMPLE / "plan.csv"), "-o", str(out), "-q"], check=True)
    source = source_from_results(out)
    assert source.data == (SAMPLE / "wholesale.csv").resolve() and source.plan_file == (SAMPLE / "plan.csv").resolve()
