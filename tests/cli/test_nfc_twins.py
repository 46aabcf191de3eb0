"""Two series whose names differ only in Unicode normalisation (``café`` composed and decomposed: different keys
that print alike) read differently in ``pricefold show``'s list and in ``ledger show``: the one not in NFC form
shows its combining accent by code point.  The ledger keeps both names as they were."""
from __future__ import annotations

import csv
import json
import unicodedata

import numpy as np

from pricefold.cli import main

COMPOSED = "caf\u00e9 noir 250 g"
DECOMPOSED = unicodedata.normalize("NFD", COMPOSED)


def write_twins(path):
    rng = np.random.default_rng(4)
    with open(path, "w", newline="", encoding="utf-8") as f:
        out = csv.writer(f)
        out.writerow(["product", "price", "volume"])
        for name in (COMPOSED, DECOMPOSED):
            for price in np.round(rng.uniform(1, 2, 30), 2):
                out.writerow([name, price, round(500 - 100 * price + rng.normal(0, 5), 1)])


def test_show_and_ledger_show_tell_nfc_twins_apart(tmp_path, capsys):
    assert COMPOSED != DECOMPOSED and unicodedata.normalize("NFC", DECOMPOSED) == COMPOSED
    write_twins(tmp_path / "twins.csv")
    results, book = tmp_path / "r.json", tmp_path / "L.jsonl"
    assert main(["fit", str(tmp_path / "twins.csv"), "--plan-price", "1.5", "-o", str(results), "-q"]) == 0
    capsys.readouterr()
    assert main(["show", str(results)]) == 0
    rows = [row[:40].rstrip() for row in capsys.readouterr().out.splitlines()[1:]]
    assert sorted(rows) == sorted([COMPOSED, "cafe⟨U+0301⟩ noir 250 g"]), rows
    assert main(["ledger", "accept-unflagged", str(results), "--ledger", str(book), "-q"]) == 0
    capsys.readouterr()
    assert main(["ledger", "show", str(book)]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert len(lines) == 2
    assert sum(line.endswith(COMPOSED) for line in lines) == 1, lines
    assert sum(line.endswith("cafe⟨U+0301⟩ noir 250 g") for line in lines) == 1, lines
    names = {json.loads(line)["series"]["product"] for line in book.read_text(encoding="utf-8").splitlines()}
    assert names == {COMPOSED, DECOMPOSED}  # the ledger keeps the names as they were


def test_the_report_tells_nfc_twins_apart(tmp_path):
    """Both series carry a stop flag (the plan price lies outside their prices), so the report lists both."""
    import pytest
    pytest.importorskip("matplotlib")
    write_twins(tmp_path / "twins.csv")
    results = tmp_path / "r.json"
    assert main(["fit", str(tmp_path / "twins.csv"), "--plan-price", "5", "-o", str(results), "-q"]) == 0
    page = tmp_path / "report.html"
    assert main(["report", str(results), "-o", str(page)]) == 0
    text = page.read_text(encoding="utf-8")
    assert "cafe⟨U+0301⟩ noir 250 g" in text and COMPOSED in text
    assert DECOMPOSED not in text


def test_ledger_show_tells_a_trailing_space_apart_and_finds_a_product_in_either_form(tmp_path, capsys):
    """A trial: 'bananas 1 kg · East' and 'bananas 1 kg · East ' printed the same, and --product typed composed
    listed none of the decomposed series' records."""
    from fitcore import ledger
    book = tmp_path / "L.jsonl"
    cocoa = "crème cocoa 250 g"  # invented
    keys = [("bananas 1 kg", "East"), ("bananas 1 kg", "East "), (cocoa, "North"),
            (unicodedata.normalize("NFD", cocoa), "East"), ("tea", "North")]
    ledger.append(book, [ledger.Entry(series={"product": p, "region": r}, action="hold", fingerprint="f",
                                      results="ab" * 32) for p, r in keys],
                  ledger.Identity("ana", "ana", "test-host"))
    assert main(["ledger", "show", str(book), "--product", "bananas 1 kg"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert [line.split("hold")[-1].strip() for line in lines] == ["bananas 1 kg · East", "bananas 1 kg · East⟨U+0020⟩"]
    for typed in (cocoa, unicodedata.normalize("NFD", cocoa), "cre⟨U+0300⟩me cocoa 250 g"):  # composed, not, shown
        assert main(["ledger", "show", str(book), "--product", typed]) == 0
        lines = capsys.readouterr().out.splitlines()
        assert [line.split("hold")[-1].strip() for line in lines] == [
            "crème cocoa 250 g · North", "cre⟨U+0300⟩me cocoa 250 g · East"], (typed, lines)


def test_show_finds_a_product_in_either_form_the_one_typed_first(tmp_path, capsys):
    """A trial: ``show --product`` typed composed found only the composed series, where ``ledger show --product``
    (and the screen's search) find both forms.  Now both are listed, the form typed first; typed as shown
    (``cafe⟨U+0301⟩``), the decomposed one first.  JSON and Parquet results alike; with ``--ledger``, the signed
    series the filter keeps are counted in either form too."""
    write_twins(tmp_path / "twins.csv")
    shown = "cafe⟨U+0301⟩ noir 250 g"
    for results in (tmp_path / "r.json", tmp_path / "r.parquet"):
        assert main(["fit", str(tmp_path / "twins.csv"), "--plan-price", "1.5", "-o", str(results), "-q"]) == 0
        for typed, first in ((COMPOSED, COMPOSED), (DECOMPOSED, shown), (shown, shown)):
            capsys.readouterr()
            assert main(["show", str(results), "--product", typed]) == 0
            rows = [row[:40].rstrip() for row in capsys.readouterr().out.splitlines()[1:]]
            assert rows == [first, *({COMPOSED, shown} - {first})], (results.suffix, typed, rows)
    # the ledger signs the decomposed series and another; the next cycle's data spell the first composed
    book = tmp_path / "L.jsonl"
    with open(tmp_path / "twins.csv", encoding="utf-8") as src:
        lines = src.readlines()
    lines += [line.replace(COMPOSED, "tea 100 g") for line in lines if line.startswith(COMPOSED)]
    for name, dropped in (("nfd", COMPOSED), ("nfc", DECOMPOSED)):
        (tmp_path / f"{name}.csv").write_text("".join(line for line in lines if not line.startswith(dropped)),
                                              encoding="utf-8")
        assert main(["fit", str(tmp_path / f"{name}.csv"), "--plan-price", "1.5", "-o", str(tmp_path / f"{name}.json"),
                     "-q"]) == 0
    assert main(["ledger", "accept-unflagged", str(tmp_path / "nfd.json"), "--ledger", str(book), "-q"]) == 0
    capsys.readouterr()
    assert main(["show", str(tmp_path / "nfc.json"), "--ledger", str(book), "--product", DECOMPOSED]) == 0
    captured = capsys.readouterr()
    assert captured.out.startswith(f"{COMPOSED} — ") and f"looks like {shown} in {book}" in captured.out
    assert main(["show", str(tmp_path / "nfc.json"), "--ledger", str(book), "--product", shown, "--product",
                 "tea 100 g"]) == 0
    captured = capsys.readouterr()
    assert [row[:40].rstrip() for row in captured.out.splitlines()[1:]] == ["tea 100 g", COMPOSED]  # as typed first
    # the ledger's spelling told apart from the results' (composed) one it reads like
    assert f"1 signed series in {book} is not in these results (present only under another spelling: {shown})" \
        in captured.err
