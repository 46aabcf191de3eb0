"""What ``pricefold triage`` makes of its files: the ledger's default name, the data's separator, and a
results file that does not name its data."""
from __future__ import annotations

import csv
import json
from collections import Counter
from pathlib import Path

import numpy as np
import pytest

import pricefold.cli as cli
import pricefold.triage_cli as triage_cli
from tui.factory import default_ledger, fit_source


@pytest.mark.parametrize("name, ledger", [
    ("results.json", "results.ledger.jsonl"),
    ("fit.v1.json", "fit.v1.ledger.jsonl"),  # only the last extension goes
    ("week.2026-12.parquet", "week.2026-12.ledger.jsonl"),
    ("sales.v2.csv.gz", "sales.v2.ledger.jsonl"),  # a compressed file: .gz and the extension before it
    ("results", "results.ledger.jsonl"),  # a results folder
])
def test_the_default_ledger_replaces_only_the_last_extension(tmp_path, name, ledger):
    assert default_ledger(tmp_path / name) == tmp_path / ledger


def semicolon_file(path: Path) -> Counter:
    """A ;-separated file whose free-text last column is named so that a comma also splits the header
    into product, price and volume (the header alone cannot tell the separator); rows per product."""
    rng = np.random.default_rng(7)
    rows = Counter()
    with open(path, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle, delimiter=";")
        writer.writerow(["product", "price", "volume", "remark,product,price,volume"])
        for product, n in (("salt 1 kg", 24), ("rice 5 kg", 31)):
            for _ in range(n):
                price = round(rng.uniform(1, 3), 2)
                writer.writerow([product, price, round(400 - 90 * price + rng.normal(0, 4)), "as sold, net"])
    with open(path, newline="", encoding="utf-8") as handle:  # counted back by the standard library's reader
        for record in csv.DictReader(handle, delimiter=";"):
            rows[record["product"]] += 1
    return rows


def triage_source(monkeypatch, argv: list[str]):
    """The source ``pricefold triage`` would open (the screen itself is not started)."""
    opened = {}
    monkeypatch.setattr(triage_cli, "open_triage", lambda source, *a, **k: opened.setdefault("source", source) and 0)
    assert cli.main(["triage", *argv]) == 0
    return opened["source"]


def observations(source) -> dict[str, int]:
    results, _ = fit_source(source)
    return {results.data.key_of(s)["product"]: int(results.data.counts[s]) for s in range(results.n_series)}


def test_triage_reads_the_data_with_the_separator_given(tmp_path, monkeypatch):
    data = tmp_path / "semi.csv"
    rows = semicolon_file(data)
    source = triage_source(monkeypatch, [str(data), "--sep", ";", "--ledger", str(tmp_path / "l.jsonl")])
    assert source.sep == ";"
    assert observations(source) == dict(rows)


def test_triage_on_results_reads_their_data_with_the_separator_given(tmp_path, monkeypatch):
    data = tmp_path / "semi.csv"
    rows = semicolon_file(data)
    out = tmp_path / "fit.v1.json"
    assert cli.main(["fit", str(data), "--sep", ";", "-o", str(out), "--quiet"]) == 0
    source = triage_source(monkeypatch, [str(out), "--sep", ";"])
    assert source.sep == ";"
    assert observations(source) == dict(rows)


def test_results_that_do_not_name_their_data_are_one_line_and_exit_2(tmp_path, capsys):
    data = tmp_path / "semi.csv"
    semicolon_file(data)
    out = tmp_path / "fit.json"
    assert cli.main(["fit", str(data), "--sep", ";", "-o", str(out), "--quiet"]) == 0
    document = json.loads(out.read_text())
    del document["input"]["path"]  # as results of a fit made from Python hold it
    out.write_text(json.dumps(document))
    capsys.readouterr()
    assert cli.main(["triage", str(out), "--ledger", str(tmp_path / "l.jsonl")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and str(out) in err and "'input' → 'path'" in err and "Traceback" not in err


def test_without_a_terminal_triage_is_one_line_and_never_draws(tmp_path, monkeypatch, capsys):
    """Under pytest standard input is not a terminal: a screen drawn there would wait for a key forever."""
    data = tmp_path / "semi.csv"
    semicolon_file(data)
    monkeypatch.setattr(triage_cli, "triage_app", lambda *a, **k: pytest.fail("the screen was started"))
    assert cli.main(["triage", str(data), "--sep", ";", "--ledger", str(tmp_path / "l.jsonl")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("pricefold triage: the triage screen needs a terminal") and err.count("\n") == 1


def test_a_session_that_could_not_open_ends_as_one_prefixed_line(tmp_path, monkeypatch, capsys):
    """After its dialog, the reason is said once more where the command was typed, named as every error is."""
    data = tmp_path / "semi.csv"
    semicolon_file(data)

    class Failed:
        failure, return_code = "semi.csv, line 1: expected a column 'price'", 2

        def run(self):
            pass
    monkeypatch.setattr(cli.sys.stdin, "isatty", lambda: True)
    monkeypatch.setattr(cli.sys.stdout, "isatty", lambda: True)
    monkeypatch.setattr(triage_cli, "triage_app", lambda *a, **k: Failed())
    assert cli.main(["triage", str(data), "--sep", ";", "--ledger", str(tmp_path / "l.jsonl")]) == 2
    assert capsys.readouterr().err == "pricefold triage: semi.csv, line 1: expected a column 'price'\n"


def test_a_cut_parquet_file_is_one_line_before_any_screen(tmp_path, monkeypatch, capsys):
    """A Parquet file cut short (a copy interrupted) is said as the loader says it, before the screen would start:
    the screen's dialog waited for a key before the same line (a trial)."""
    cut = tmp_path / "cut.parquet"
    cut.write_bytes((Path(__file__).parents[2] / "sample" / "results.parquet").read_bytes()[:5000])
    monkeypatch.setattr(triage_cli, "triage_app", lambda *a, **k: pytest.fail("the screen was started"))
    monkeypatch.setattr(triage_cli, "open_triage", lambda *a, **k: pytest.fail("the screen was started"))
    assert cli.main(["triage", str(cut), "--ledger", str(tmp_path / "l.jsonl")]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"pricefold triage: {cut}: not a readable Parquet file (") and err.count("\n") == 1
    assert not (tmp_path / "l.jsonl").exists()


def test_a_dumb_terminal_gets_one_line_and_no_screen(tmp_path, monkeypatch, capsys):
    """``TERM=dumb`` (an editor's shell buffer) cannot draw a screen: the screen's escapes would arrive as text (a
    trial: the alternate screen, mouse tracking and 24-bit colours written to it)."""
    import sys
    data = tmp_path / "semi.csv"
    semicolon_file(data)
    monkeypatch.setenv("TERM", "dumb")
    for stream in ("stdin", "stdout"):
        monkeypatch.setattr(getattr(sys, stream), "isatty", lambda: True, raising=False)
    monkeypatch.setattr(triage_cli, "triage_app", lambda *a, **k: pytest.fail("the screen was started"))
    assert cli.main(["triage", str(data), "--sep", ";", "--ledger", str(tmp_path / "l.jsonl")]) == 2
    err = capsys.readouterr().err
    assert "TERM is 'dumb'" in err and err.count("\n") == 1 and not (tmp_path / "l.jsonl").exists()
