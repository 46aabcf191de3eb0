"""A next cycle's data spelling some series otherwise (a trailing space on a product and on a region, a product in
decomposed form): the series the results hold reads like the signed series the missing note names, before and
after the look-alike is decided as a new series.  A trial found: once decided, ``apples 1 kg `` listed plainly
under a note naming ``apples 1 kg``, the decomposed ``crème`` shown as the composed one; a ``--product`` filter gave
no note, or one without its "present only under another spelling" clause, and no hint for a near miss."""
from __future__ import annotations

import csv
import shutil
import subprocess
import sys
import unicodedata
from pathlib import Path

import pytest

from fitcore.text import told_apart, told_apart_from
from pricefold.cli import main

SAMPLE = Path(__file__).resolve().parents[2] / "sample"
NFC = "crème cocoa 250 g"
NFD = unicodedata.normalize("NFD", NFC)
RENAMED = {"apples 1 kg": "apples 1 kg ", NFC: NFD}


@pytest.fixture(scope="module")
def cycle(tmp_path_factory):
    """``(folder, ledger, results)``: the sample (cocoa spelled ``crème``, composed) fitted and accepted unflagged;
    the next week with apples spelled ``apples 1 kg ``, crème decomposed and lemons' ``North`` as ``North ``, fitted
    against that ledger."""
    folder = tmp_path_factory.mktemp("lookalike")
    base = folder / "sales1.csv"
    base.write_text((SAMPLE / "wholesale.csv").read_text(encoding="utf-8").replace("\ncocoa 250 g,", f"\n{NFC},"),
                    encoding="utf-8")
    book = folder / "L.jsonl"
    assert main(["fit", str(base), "--segment", "region", "--date", "week", "--plan-price", "2.5",
                 "-o", str(folder / "c1.json"), "-q"]) == 0
    assert main(["ledger", "accept-unflagged", str(folder / "c1.json"), "--ledger", str(book), "-q"]) == 0
    subprocess.run([sys.executable, str(SAMPLE / "next_week.py"), "--from", str(base), str(folder / "sales2.csv")],
                   check=True, capture_output=True)
    with open(folder / "sales2.csv", newline="", encoding="utf-8") as src, \
            open(folder / "sales2x.csv", "w", newline="", encoding="utf-8") as out:
        rows = csv.DictReader(src)
        write = csv.DictWriter(out, rows.fieldnames)
        write.writeheader()
        for row in rows:
            row["product"] = RENAMED.get(row["product"], row["product"])
            if row["product"] == "lemons 500 g" and row["region"] == "North":
                row["region"] = "North "
            write.writerow(row)
    assert main(["fit", str(folder / "sales2x.csv"), "--segment", "region", "--date", "week", "--plan-price", "2.5",
                 "-o", str(folder / "c2.json"), "--ledger", str(book), "-q"]) == 0
    return folder, book, folder / "c2.json"


def own_copy(book: Path, tmp_path: Path) -> Path:
    shutil.copyfile(book, tmp_path / "L.jsonl")
    return tmp_path / "L.jsonl"


def run(capsys, *argv) -> tuple[int, str, str]:
    capsys.readouterr()
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_a_decided_look_alike_is_told_apart_from_the_missing_signed_series_it_reads_like(cycle, capsys, tmp_path):
    """Before: after ``--new-series``, ``show --ledger`` listed ``apples 1 kg  · North`` plainly (only a value read
    like another listed was told apart: ``North⟨U+0020⟩`` was, beside lemons' other regions), showed the
    decomposed crème in full as ``crème cocoa 250 g · North`` under a note naming the composed one as missing, and
    the note lost its "present only under another spelling" clause (only series new to the ledger were paired)."""
    folder, signed, results = cycle
    book = own_copy(signed, tmp_path)
    assert main(["ledger", "accept-unflagged", str(results), "--ledger", str(book), "--new-series", "-q"]) == 0
    code, out, err = run(capsys, "show", results, "--ledger", book)
    assert code == 0
    listed = {line.split("  ")[0] for line in out.splitlines()}
    assert {"apples 1 kg⟨U+0020⟩ · North", "lemons 500 g · North⟨U+0020⟩"} <= listed
    assert "apples 1 kg · North" not in listed and "apples 1 kg  · North" not in out
    # the look-alikes decided: the ledger's spellings are still in the results only under another
    assert f"6 signed series in {book} are not in these results (each present only under another spelling: " in err
    code, out, err = run(capsys, "show", results, "--ledger", book, "--product", NFC, "--key", "region=North")
    assert code == 0 and out.startswith("cre⟨U+0300⟩me cocoa 250 g · North — ")
    assert f"(present only under another spelling: {NFC} · North)" in err


def test_a_filtered_missing_note_counts_and_says_as_the_whole_one(cycle, capsys):
    """Before (the look-alikes not decided yet): ``--product 'crème cocoa 250 g'`` gave no note at all (none of the
    ledger's series in the filtered list read as "none shared"), ``--product 'apples 1 kg'`` a note without its
    clause and no hint for the product spelled with a space."""
    _, book, results = cycle
    for typed in (NFC, NFD):
        code, _, err = run(capsys, "show", results, "--ledger", book, "--product", typed)
        assert code == 0
        assert (f"3 signed series in {book} are not in these results (each present only under another spelling: "
                f"{NFC} · ") in err, typed
    code, _, err = run(capsys, "show", results, "--ledger", book, "--product", "apples 1 kg")
    assert code == 1
    assert f"pricefold show: no series in {results} matches; did you mean 'apples 1 kg '?" in err
    assert (f"3 signed series in {book} are not in these results (each present only under another spelling: "
            "apples 1 kg · ") in err
    code, _, err = run(capsys, "show", results, "--product", "APPLES 1 KG")  # no ledger: the hint all the same
    assert code == 1 and err.strip() == f"pricefold show: no series in {results} matches; did you mean 'apples 1 kg '?"
    for argv in (("--product", "no such thing"), ("--product", "apples 1 kg ", "--key", "region=West")):
        code, _, err = run(capsys, "show", results, *argv)  # nothing alike, or the product there as typed
        assert code == 1 and err.strip() == f"pricefold show: no series in {results} matches", argv


def test_a_filtered_list_tells_a_decided_look_alike_from_the_missing_series(cycle, capsys, tmp_path):
    """Following the hint after the look-alikes were decided: ``--product 'apples 1 kg '`` listed
    ``apples 1 kg  · North  accepted``, reading as the signed series the note names missing (the filter's note,
    and so the spellings told apart from, held only the series the filter names)."""
    _, signed, results = cycle
    book = own_copy(signed, tmp_path)
    assert run(capsys, "ledger", "accept-unflagged", results, "--ledger", book, "--new-series", "-q")[0] == 0
    code, out, _ = run(capsys, "show", results, "--ledger", book, "--product", "apples 1 kg ")
    assert code == 0 and "apples 1 kg⟨U+0020⟩ · North" in out and "apples 1 kg · North" not in out


def test_ledger_show_says_that_no_series_matches_with_a_hint(cycle, capsys):
    """Before: ``ledger show --product 'apples 1 kg '`` printed nothing and exited 0."""
    _, book, _ = cycle
    code, out, err = run(capsys, "ledger", "show", book, "--product", "apples 1 kg ")
    assert code == 1 and out == ""
    assert err.strip() == f"pricefold ledger: no series in {book} matches; did you mean 'apples 1 kg'?"
    code, out, _ = run(capsys, "ledger", "show", book, "--product", NFD)  # either form finds the composed one
    assert code == 0 and f"{NFC} · North" in out


def test_told_apart_beside_keys_not_shown():
    """The rule under the lists: a value reading like one of ``beside`` (the missing note's keys) is told apart from
    it though no listed value reads like it; values of ``beside`` are never returned."""
    listed = [("apples 1 kg ", "North"), (NFD, "East"), ("pears 1 kg", "North")]
    assert told_apart(listed) == listed
    assert told_apart(listed, [("apples 1 kg", "North"), (NFC, "East")]) == [
        ("apples 1 kg⟨U+0020⟩", "North"), ("cre⟨U+0300⟩me cocoa 250 g", "East"), ("pears 1 kg", "North")]
    assert told_apart([(NFC, "North")], [(NFD, "North")]) == [(NFC, "North")]  # the composed one shows as it is
    one_by_one = told_apart_from([("apples 1 kg", "North"), (NFC, "East")])  # the screen's rows, the report's
    assert [one_by_one(key) for key in listed] == told_apart(listed, [("apples 1 kg", "North"), (NFC, "East")])


def test_the_reports_decision_table_tells_a_decided_look_alike_apart(cycle, capsys, tmp_path):
    """Before: a look-alike decided one by one was listed in the decision table as ``apples 1 kg · North``, as the
    summary's note names the signed series missing from the results."""
    pytest.importorskip("matplotlib")
    import json

    from fitcore import ledger
    _, signed, results = cycle
    book = own_copy(signed, tmp_path)
    record = next(r for r in json.loads(results.read_text())["series"]
                  if r["key"] == {"product": "apples 1 kg ", "region": "North"})
    ledger.append(book, [ledger.Entry(series=record["key"], action="hold", fingerprint=record["fingerprint"],
                                      results="ab" * 32, note="spelled with a space: asking")],
                  ledger.Identity("bo", "bo", "other-host"))
    code, _, err = run(capsys, "report", results, "--ledger", book, "-o", tmp_path / "r.html")
    assert code == 0
    page = (tmp_path / "r.html").read_text(encoding="utf-8")
    table = page[page.index('<section id="decisions"'):]
    assert "apples 1 kg⟨U+0020⟩ · North" in table and "apples 1 kg · North" not in table
    assert "present only under another spelling" in err
    # the summary's sentences hold shown forms already: not escaped again (it read "North⟨U+27E8⟩U+0020⟩")
    summary = page[page.index('<section id="summary"'):page.index('<section id="decisions"')]
    assert "⟨U+0020⟩" in summary and "U+27E8" not in summary


def test_a_key_filter_matches_either_form_and_hints_at_a_near_miss(cycle, capsys):
    """Before: ``--key`` matched the value exactly as typed (``product=crème…`` composed found nothing where the
    results spell it decomposed, while ``--product`` found it), and a near miss got no hint."""
    _, _, results = cycle
    code, out, _ = run(capsys, "show", results, "--key", f"product={NFC}", "--key", "region=North")
    assert code == 0 and out.startswith(f"{NFD} · North — ")  # (no ledger, no missing twin to tell it from)
    code, _, err = run(capsys, "show", results, "--product", "lemons 500 g", "--key", "region=North")
    assert code == 1  # lemons' North is spelled 'North ' in these results; other products' 'North' not named
    assert err.strip() == f"pricefold show: no series in {results} matches; did you mean region='North '?"
    code, _, err = run(capsys, "show", results, "--key", "region=NORTH")
    assert code == 1 and "did you mean region='North' or region='North '?" in err.replace(
        "region='North ' or region='North'", "region='North' or region='North '")


def test_ledger_show_names_a_product_that_reads_alike(cycle, capsys, tmp_path):
    """Before: once both spellings were signed, ``ledger show --product 'apples 1 kg'`` listed that spelling's
    records and said nothing of the other's, whose history a reader would take for missing."""
    _, signed, results = cycle
    book = own_copy(signed, tmp_path)
    code, _, err = run(capsys, "ledger", "show", book, "--product", "apples 1 kg")
    assert code == 0 and err == ""  # one spelling signed so far
    assert run(capsys, "ledger", "accept-unflagged", results, "--ledger", book, "--new-series", "-q")[0] == 0
    code, out, err = run(capsys, "ledger", "show", book, "--product", "apples 1 kg")
    assert code == 0 and "apples 1 kg · North" in out and "apples 1 kg⟨U+0020⟩" not in out
    assert err.strip() == (f"pricefold ledger: note: {book} also holds the product 'apples 1 kg ', which reads alike "
                           "(not listed: another product)")


def test_also_alike_and_near_miss_name_every_look_alike():
    from pricefold.show import also_alike, near_miss
    names = ["North ", "North", "north", "South", None]
    assert near_miss(["NORTH"], names, "region=") == \
        "; did you mean region='North ' or region='North' or region='north'?"
    assert near_miss(["North"], names) == ""  # there as typed: another filter kept none
    assert also_alike(["North"], names, "F") == \
        "note: F also holds the products 'North ', 'north', which read alike (not listed: other products)"
    assert also_alike(["South"], names, "F") == ""
    assert also_alike([NFD], [NFC], "F") == ""  # the other Unicode form is picked, not a look-alike


def test_look_alikes_that_print_alike_are_told_apart_in_a_hint():
    """Before: "did you mean region='Süd' or region='Süd'?" — a composed and a decomposed value quoted alike."""
    from pricefold.show import also_alike, near_miss
    nfd = unicodedata.normalize("NFD", "Süd")
    assert near_miss(["SÜD"], ["Süd", nfd], "region=") == "; did you mean region='Süd' or region='Su⟨U+0308⟩d'?"
    assert also_alike(["crème cocoa 250 g "], [NFC, NFD], "F") == (
        f"note: F also holds the products '{NFC}', 'cre⟨U+0300⟩me cocoa 250 g', which read alike (not listed: "
        "other products)")


def test_a_key_filter_names_a_value_that_reads_alike(cycle, capsys):
    """Before: ``--key region=North`` said nothing of lemons' ``North `` series (only ``--product`` had the note)."""
    _, _, results = cycle
    code, out, err = run(capsys, "show", results, "--key", "region=North")
    assert code == 0 and err.strip() == (f"pricefold show: note: {results} also holds the region 'North ', which "
                                         "reads alike (not listed: another region)")
    code, _, err = run(capsys, "show", results, "--product", "pears 1 kg", "--key", "region=North")
    assert code == 0 and err == ""  # among the series --product keeps: pears has no 'North '


def test_a_series_shown_alone_reads_apart_from_its_twin(cycle, capsys):
    """Before: ``show --key 'region=North '`` printed ``lemons 500 g · North  — …``: its trailing space read as
    the North the other series are in (the lists showed ``North⟨U+0020⟩``)."""
    _, _, results = cycle
    code, out, _ = run(capsys, "show", results, "--product", "lemons 500 g", "--key", "region=North ")
    assert code == 0 and out.startswith("lemons 500 g · North⟨U+0020⟩ — ")
    code, out, _ = run(capsys, "show", results, "--product", "pears 1 kg", "--key", "region=North")
    assert code == 0 and out.startswith("pears 1 kg · North — ")  # a plain key: as it is, no key read


def test_a_product_respelled_only_where_the_keys_point_is_hinted():
    """A trial: ``--product "zormav jam 100 g" --key region=Wexmoor`` said only "no series matches" — the product is
    there in other regions, and respelled in that one ('Zormav Jam 100 g'), which ``--product`` alone hinted at."""
    from fitcore.text import EitherForm
    from pricefold.show import filter_near_miss
    keys = [{"product": "lemons 500 g", "region": "North"}, {"product": "Lemons 500 g", "region": "East"},
            {"product": "limes 500 g", "region": "East"}]
    hint = filter_near_miss(lambda: keys, ["lemons 500 g"], EitherForm(["lemons 500 g"]), {"region": "East"})
    assert hint == "; did you mean 'Lemons 500 g'?"
    assert filter_near_miss(lambda: keys, ["lemons 500 g"], EitherForm(["lemons 500 g"]), {"region": "West"}) == ""
