"""``pricefold ledger export``: formula-like text made inert, the head witness on every row, file modes."""
from __future__ import annotations

import csv
import json
import hashlib
import io
import os

import numpy as np
import pytest

from fitcore import ledger
from pricefold.cli import main

# Invented products whose names a spreadsheet would run as formulas (OWASP's CSV-injection list:
# cells starting with =, +, -, @, tab, carriage return), and one harmless name.
RISKY = ["=SUM(A1:A9)", "+1 tin", "-5 kg bag", "@home pack", "\tsoap", "\rlime"]
NAMES = [*RISKY, "plain pears"]
NOTE = '=HYPERLINK("http://example.invalid","ok")'


@pytest.fixture(scope="module")
def signed(tmp_path_factory):
    """Results for the invented products and a ledger accepting each, by "@ana" with a formula note."""
    folder = tmp_path_factory.mktemp("export")
    rng = np.random.default_rng(3)
    rows = ["product,@region,price,volume"]
    for name in NAMES:
        for price in rng.uniform(1.0, 3.0, 30):
            volume = 1000 - 200 * price + rng.normal(0, 10)
            quoted = '"' + name.replace('"', '""') + '"'
            rows.append(f"{quoted},North,{price:.2f},{volume:.1f}")
    data = folder / "data.csv"
    data.write_text("\n".join(rows) + "\n", newline="")
    results = folder / "results.json"
    assert main(["fit", str(data), "--segment", "@region", "-o", str(results), "--quiet"]) == 0
    document = json.loads(results.read_text())
    path = folder / "ledger.jsonl"
    entries = [ledger.Entry(series=s["key"], action="accept", fingerprint=s["fingerprint"],
                            results=ledger.results_digest(document), model=s["chosen"], proposed=s["chosen"],
                            note=NOTE, flags=[f["code"] for f in s["flags"]]) for s in document["series"]]
    ledger.append(path, entries, ledger.Identity("@ana", "ana", "h"))
    return results, path


def export(results, path, out, *extra):
    assert main(["ledger", "export", str(path), "--results", str(results), "-o", str(out), *extra]) == 0
    with out.open(newline="", encoding="utf-8") as handle:
        return list(csv.reader(handle))


def test_text_cells_that_look_like_formulas_get_a_leading_quote(tmp_path, signed):
    results, path = signed
    header, *rows = export(results, path, tmp_path / "out.csv")
    assert header[:2] == ["product", "'@region"] and header[-3:] == ["ledger_head", "inside_range", "flags"]
    assert sorted(row[0] for row in rows) == sorted(["'" + name for name in RISKY] + ["plain pears"])
    column = {name: i for i, name in enumerate(header)}
    for row in rows:
        assert row[column["status"]] == "accepted"
        assert row[column["analyst"]] == "'@ana" and row[column["note"]] == "'" + NOTE
        assert not row[column["coef"]].startswith("'") and json.loads(row[column["coef"]])  # numbers untouched
        assert row[column["at"]][0].isdigit()


def test_raw_writes_text_cells_as_they_are(tmp_path, signed):
    results, path = signed
    header, *rows = export(results, path, tmp_path / "raw.csv", "--raw")
    assert header[1] == "@region" and sorted(row[0] for row in rows) == sorted(NAMES)
    assert {row[header.index("note")] for row in rows} == {NOTE}


def test_every_row_carries_the_ledger_head(tmp_path, signed, capsys):
    results, path = signed
    header, *rows = export(results, path, tmp_path / "out.csv")
    head = ledger.Ledger(path).head_text
    assert {row[header.index("ledger_head")] for row in rows} == {head} and head.startswith(f"{len(NAMES)}:")
    assert f"(ledger head {head})" in capsys.readouterr().err


@pytest.mark.parametrize("umask, existing, expected", [(0o022, None, 0o644), (0o077, None, 0o600),
                                                       (0o022, 0o640, 0o640), (0o002, 0o664, 0o664)])
def test_export_files_respect_the_umask_and_keep_an_existing_mode(tmp_path, signed, umask, existing, expected):
    results, path = signed
    out = tmp_path / "out.csv"
    if existing is not None:
        out.write_text("product,status,model,coef\n")  # an earlier export: the only kind export replaces
        from fitcore.outputs.seal import seal_file
        seal_file(out, hashlib.sha256(out.read_bytes()).hexdigest())  # sealed, as export leaves what it writes
        out.chmod(existing)
    old = os.umask(umask)
    try:
        export(results, path, out)
    finally:
        os.umask(old)
    assert out.stat().st_mode & 0o777 == expected
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.csv"]  # no temporary left behind


@pytest.mark.parametrize("name", ["family", "note", "status"])
def test_a_key_column_named_like_an_export_column_gets_a_header_of_its_own(tmp_path, capsys, name):
    """A segment called 'family' (or 'note', 'status') wrote two columns of one name: pandas read the second as
    'family.1' and a script taking 'family' got the segment.  The key column is written as 'key_family', said in one
    line, and pandas reads every column back: the segment's values as in the data, the export's own beside them."""
    import pandas as pd
    rng = np.random.default_rng(4)
    rows = [f"product,{name},price,volume"]
    for product in ("pears", "plums"):
        for segment in ("North", "=South"):
            for price in rng.uniform(1.0, 3.0, 20):
                rows.append(f"{product},{segment},{price:.2f},{1000 - 200 * price + rng.normal(0, 10):.1f}")
    data = tmp_path / "data.csv"
    data.write_text("\n".join(rows) + "\n")
    results, book = tmp_path / "r.json", tmp_path / "l.jsonl"
    assert main(["fit", str(data), "--segment", name, "--degrees", "0-1", "--no-loglog", "-o", str(results),
                 "--quiet"]) == 0
    document = json.loads(results.read_text())
    ledger.append(book, [ledger.Entry(series=s["key"], action="accept", fingerprint=s["fingerprint"],
                                      results=ledger.results_digest(document), model=s["chosen"],
                                      proposed=s["chosen"], note="seen") for s in document["series"]],
                  ledger.Identity("ana", "ana", "h"))
    capsys.readouterr()
    out = tmp_path / "e.csv"
    export(results, book, out, "--quiet", "--raw")
    err = capsys.readouterr().err
    assert err == f"pricefold ledger: {out}: key column '{name}' written as 'key_{name}' (the export has its own " \
                  "column of that name)\n"
    frame = pd.read_csv(out, keep_default_na=False)  # pandas: an outside reader of the CSV
    assert list(frame.columns[:3]) == ["product", f"key_{name}", "status"] and frame.columns.is_unique
    original = pd.read_csv(data).drop_duplicates(["product", name])
    assert sorted(zip(frame["product"], frame[f"key_{name}"])) == sorted(zip(original["product"], original[name]))
    assert set(frame["family"]) == {"poly"} and set(frame["note"]) == {"seen"} and set(frame["status"]) == {"accepted"}


def test_a_renamed_key_header_clashes_with_no_other():
    from pricefold.ledger_export import COLUMNS, key_headers
    assert key_headers(["note", "key_note", "region"]) == {"note": "key_key_note", "key_note": "key_note",
                                                           "region": "region"}
    assert key_headers(["product", "region"]) == {"product": "product", "region": "region"}
    headers = list(key_headers(["family", "key_family", "key_key_family"]).values()) + list(COLUMNS)
    assert len(set(headers)) == len(headers)


def test_dash_writes_the_csv_to_standard_output_and_no_file(tmp_path, signed, capsys, monkeypatch):
    """A trial: ``-o -`` wrote a file named '-' ('46 series written to -'), and ``-o /dev/stdout`` is refused (not
    a regular file), so the export could not be piped.  ``-o -`` is the CSV on standard output, as the file holds it."""
    results, path = signed
    file_rows = export(results, path, tmp_path / "out.csv")
    monkeypatch.chdir(tmp_path)
    capsys.readouterr()
    assert main(["ledger", "export", str(path), "--results", str(results), "-o", "-"]) == 0
    said = capsys.readouterr()
    assert list(csv.reader(io.StringIO(said.out, newline=""))) == file_rows and not (tmp_path / "-").exists()
    assert f"{len(NAMES)} series written to standard output (ledger head " in said.err


def test_a_reader_that_goes_away_early_is_said_and_not_a_success(tmp_path):
    """A trial: ``export -o - | head -c 1000`` said '3,000 series written to standard output' and exited 0 when the
    pipe took 64 KiB of 851 KB; a consumer dying mid-stream could not be told apart.  Now one line, exit 74."""
    import fcntl
    import subprocess
    import sys
    from pathlib import Path
    results = Path(__file__).resolve().parents[2] / "sample" / "results.parquet"
    path = tmp_path / "L.jsonl"
    assert main(["ledger", "accept-unflagged", str(results), "--ledger", str(path), "-q"]) == 0
    whole = export(results, path, tmp_path / "whole.csv")
    read, write = os.pipe()
    fcntl.fcntl(write, 1031, 4096)  # F_SETPIPE_SZ: a pipe far smaller than the export (≈ 54 KB)
    done = subprocess.Popen([sys.executable, "-m", "pricefold", "ledger", "export", str(path), "--results",
                             str(results), "-o", "-"], stdout=write, stderr=subprocess.PIPE, text=True)
    os.close(write)
    assert os.read(read, 100).startswith(b"product,")
    os.close(read)  # the reader goes away
    _, err = done.communicate(timeout=120)
    assert done.returncode == 74, err
    size = (tmp_path / "whole.csv").stat().st_size
    assert err.strip() == ("pricefold ledger: the reader of standard output went away before the export was whole "
                           f"({size:,} bytes, {len(whole) - 1} series): not every row reached it"), err
