"""Where results meet a ledger: the key columns must be the ledger's series' (one shared check), ``ledger show
--product`` filters on the product column, ``show --ledger`` leaves out a backtest against another ledger, and
carry counts what ``show --ledger`` says each series is due.

The data are invented weekly series (``test_cycle.write_weeks``); what is checked is pricefold's bookkeeping:
which records are written, which lines are printed, and that carry's counts equal ``show --ledger``'s dues.
"""
from __future__ import annotations

import csv
from collections import Counter

from fitcore import ledger
from pricefold.cli import main

from .test_cycle import MOVER, first_cycle_signed, fit, write_weeks


def with_segment(source, out, name: str, values=("North", "East")) -> None:
    """The rows of ``source`` once per segment value, in a segment column called ``name``."""
    rows = list(csv.reader(open(source, newline="")))
    with open(out, "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow([rows[0][0], name, *rows[0][1:]])
        writer.writerows([row[0], value, *row[1:]] for value in values for row in rows[1:])


def fit_segmented(data, out, segment, ledger_path=None):
    args = ["fit", str(data), "--segment", segment, "--date", "week", "--plan-price", "2.3", "--degrees", "0-1",
            "--no-loglog", "-o", str(out), "--quiet"]
    assert main(args + (["--ledger", str(ledger_path)] if ledger_path else [])) == 0


def test_results_keyed_by_other_columns_are_refused_by_writers(tmp_path, capsys):
    write_weeks(tmp_path / "w.csv", 40)
    with_segment(tmp_path / "w.csv", tmp_path / "region.csv", "region")
    with_segment(tmp_path / "w.csv", tmp_path / "status.csv", "status")
    fit_segmented(tmp_path / "region.csv", tmp_path / "region.json", "region")
    fit_segmented(tmp_path / "status.csv", tmp_path / "status.json", "status")
    book = tmp_path / "L.jsonl"
    assert main(["ledger", "accept-unflagged", str(tmp_path / "region.json"), "--ledger", str(book), "-q"]) == 0
    before = book.read_bytes()
    capsys.readouterr()
    assert main(["ledger", "accept-unflagged", str(tmp_path / "status.json"), "--ledger", str(book)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1
    assert "keyed by product, status, but those in" in err and "by product, region" in err
    assert book.read_bytes() == before  # nothing appended
    out = tmp_path / "e.csv"
    assert main(["ledger", "export", str(book), "--results", str(tmp_path / "status.json"), "-o", str(out)]) == 2
    assert "product, status" in capsys.readouterr().err and not out.exists()
    # show --ledger reads on, with one warning line
    assert main(["show", str(tmp_path / "status.json"), "--ledger", str(book)]) == 0
    said = capsys.readouterr()
    assert "warning" in said.err and "product, region" in said.err and "pending" in said.out
    # the results keyed as the ledger's series still go through; an empty ledger takes any key columns
    assert main(["ledger", "export", str(book), "--results", str(tmp_path / "region.json"), "-o", str(out)]) == 0
    assert main(["ledger", "accept-unflagged", str(tmp_path / "status.json"), "--ledger",
                 str(tmp_path / "new.jsonl"), "-q"]) == 0
    assert ledger.verify(tmp_path / "new.jsonl") == []


def test_results_keyed_by_fewer_columns_take_none_of_the_ledgers_decisions(tmp_path, capsys):
    """A ledger keyed by product and region, the next cycle fitted by product alone: ``fit --ledger`` warns and
    backtests nothing, ``show --ledger`` lists every series pending (before: each product took a region's
    signed curve, backtested it and raised 'shifted', and read as stale)."""
    write_weeks(tmp_path / "w.csv", 40, seed=9)
    with_segment(tmp_path / "w.csv", tmp_path / "region.csv", "region")
    fit_segmented(tmp_path / "region.csv", tmp_path / "region.json", "region")
    book = tmp_path / "L.jsonl"
    assert main(["ledger", "accept-unflagged", str(tmp_path / "region.json"), "--ledger", str(book), "-q"]) == 0
    write_weeks(tmp_path / "w2.csv", 44, seed=9)
    capsys.readouterr()
    second = fit(tmp_path / "w2.csv", tmp_path / "r2.json", book)
    assert "keyed by product, but those in" in capsys.readouterr().err
    assert not any(r.get("backtest") or "shifted" in [f["code"] for f in r["flags"]] for r in second.values())
    assert main(["show", str(tmp_path / "r2.json"), "--ledger", str(book)]) == 0
    lines = capsys.readouterr().out.splitlines()[1:]
    assert len(lines) == len(second) and all(" pending " in line for line in lines)


def test_ledger_show_filters_on_the_product_column(tmp_path, capsys):
    write_weeks(tmp_path / "w.csv", 40)
    for segment in ("family", "note", "n"):  # each sorts before "product" in a record's series
        with_segment(tmp_path / "w.csv", tmp_path / f"{segment}.csv", segment)
        fit_segmented(tmp_path / f"{segment}.csv", tmp_path / f"{segment}.json", segment)
        book = tmp_path / f"{segment}.jsonl"
        assert main(["ledger", "accept-unflagged", str(tmp_path / f"{segment}.json"), "--ledger", str(book), "-q"]) == 0
        capsys.readouterr()
        assert main(["ledger", "show", str(book), "--product", "item 1"]) == 0
        lines = capsys.readouterr().out.splitlines()
        assert len(lines) == 2 and all(line.endswith(("item 1 · North", "item 1 · East")) for line in lines)
        assert main(["ledger", "show", str(book), "--product", "North"]) == 1  # a region: no product matches
        assert capsys.readouterr().out == ""


def test_show_leaves_out_a_backtest_against_another_ledger(tmp_path, capsys):
    book = tmp_path / "L.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    fit(tmp_path / "c1.csv", tmp_path / "r1.json")
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q",
                 "--analyst", "ana"]) == 0
    other = tmp_path / "other.jsonl"
    other.write_bytes(book.read_bytes())
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    fit(tmp_path / "c2.csv", tmp_path / "r2.json", book)
    capsys.readouterr()
    assert main(["show", str(tmp_path / "r2.json"), "--ledger", str(book), "--product", "item 1"]) == 0
    assert "since sign-off" in capsys.readouterr().out  # against its own ledger: shown
    assert main(["show", str(tmp_path / "r2.json"), "--ledger", str(other), "--product", "item 1"]) == 0
    said = capsys.readouterr()
    assert "since sign-off" not in said.out and "backtest passed" not in said.out
    assert said.err.count("\n") == 1 and f"backtested against {book}, not {other}" in said.err
    assert main(["ledger", "carry", str(tmp_path / "r2.json"), "--ledger", str(other)]) == 2
    assert f"backtested against {book}, not {other}" in capsys.readouterr().err  # carry's same words


def show_dues(results, book, capsys) -> Counter:
    """``show --ledger``'s due column, counted (series with nothing due left out)."""
    capsys.readouterr()
    assert main(["show", str(results), "--ledger", str(book)]) == 0
    lines = capsys.readouterr().out.splitlines()
    start = lines[0].index("due")
    return Counter(line[start:start + 21].strip() for line in lines[1:] if line[start:start + 21].strip() != "—")


def carry_left(results, book, capsys) -> Counter:
    capsys.readouterr()
    assert main(["ledger", "carry", str(results), "--ledger", str(book)]) == 0
    line = next(line for line in capsys.readouterr().err.splitlines() if line.startswith("left for a human"))
    inside = line[line.index("(") + 1:line.rindex(")")]
    left = Counter() if inside == "none" else Counter(
        {part.rsplit(" ", 1)[0]: int(part.rsplit(" ", 1)[1]) for part in inside.split(" · ")})
    left.pop("changed since the fit", None)  # carry's own: the ledger moved after the fit (show has no fit's head)
    return left


def test_carry_counts_what_show_says_is_due(tmp_path, capsys):
    book = tmp_path / "L.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    fit(tmp_path / "c1.csv", tmp_path / "r1.json")
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    second = fit(tmp_path / "c2.csv", tmp_path / "r2.json", book)
    assert main(["ledger", "carry", str(tmp_path / "r2.json"), "--ledger", str(book), "-q"]) == 0
    held = second["item 2"]  # held on these very data: show says held, nothing due
    latest = ledger.Ledger(book).histories
    from fitcore.ledger.replay import series_id
    ledger.append(book, [ledger.Entry(series=held["key"], action="hold", fingerprint=held["fingerprint"],
                                      results="ab" * 32, note="look later", last_date=held["last_date"],
                                      supersedes=latest[series_id(held["key"])].latest["digest"])],
                  ledger.Identity("ana", "ana", "host"))
    assert carry_left(tmp_path / "r2.json", book, capsys) == show_dues(tmp_path / "r2.json", book, capsys)
    # last cycle's data fitted again against the ledger, now signed on newer data
    for name in ("old.json", "old.parquet"):
        fit(tmp_path / "c1.csv", tmp_path / "old.json", book) if name.endswith("json") else main(
            ["fit", str(tmp_path / "c1.csv"), "--date", "week", "--plan-price", "2.3", "--degrees", "0-1",
             "--no-loglog", "-o", str(tmp_path / name), "--quiet", "--ledger", str(book)])
        dues = show_dues(tmp_path / name, book, capsys)
        assert dues["decided on newer data"] >= 1 and "no new rows" not in dues
        left = carry_left(tmp_path / name, book, capsys)
        assert left == dues and "new look (held)" not in left
    # one such series in full: the proposal beside the signed curve is these older results', not this cycle's
    assert main(["show", str(tmp_path / "old.json"), "--ledger", str(book), "--product", "item 1"]) == 0
    said = capsys.readouterr().out
    assert "decided on newer data" in said and "This cycle's proposal" not in said
    assert "since sign-off (the curve as signed): " in said and "The proposal of these older results, " in said


def test_carry_reads_the_ledger_before_the_results_backtest(tmp_path, capsys):
    """``carry --ledger`` set to a results file, a plan CSV or a hand-edited copy says "not a ledger" / the chain
    is broken, as every command does (before: "backtested against L, not X", as if X were another ledger)."""
    book = tmp_path / "L.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    fit(tmp_path / "c1.csv", tmp_path / "r1.json")
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    fit(tmp_path / "c2.csv", tmp_path / "r2.json", book)
    edited = tmp_path / "edited.jsonl"
    lines = book.read_text().splitlines(keepends=True)
    edited.write_text("".join([*lines[:1], lines[1].replace('"note":""', '"note":"x"'), *lines[2:]]))
    assert edited.read_text() != book.read_text()
    for given, said in ((tmp_path / "r1.json", "not a ledger"), (tmp_path / "c1.csv", "not a ledger"),
                        (edited, "the chain is broken")):
        capsys.readouterr()
        before = given.read_bytes()
        assert main(["ledger", "carry", str(tmp_path / "r2.json"), "--ledger", str(given)]) == 2
        err = capsys.readouterr().err
        assert said in err and "backtested against" not in err and len(err.splitlines()) == 1
        assert given.read_bytes() == before


def test_results_sharing_no_series_with_the_ledger_are_said_everywhere(tmp_path, capsys):
    """Results keyed by the ledger's columns whose segment values are spelled otherwise (``north`` for
    ``North``) share not one series with it: every reader says so in one warning line, ``fit``'s summary does
    not call it "no signed series has new data", and ``accept-unflagged`` refuses without ``--new-series``
    (before: all silent, and the bulk accept started a parallel set of series)."""
    write_weeks(tmp_path / "w.csv", 40, seed=9)
    with_segment(tmp_path / "w.csv", tmp_path / "region.csv", "region")
    fit_segmented(tmp_path / "region.csv", tmp_path / "r1.json", "region")
    book = tmp_path / "L.jsonl"
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    signed = len(ledger.Ledger(book).histories)
    write_weeks(tmp_path / "w2.csv", 44, seed=9)
    with_segment(tmp_path / "w2.csv", tmp_path / "lower.csv", "region", values=("north", "east"))
    capsys.readouterr()
    assert main(["fit", str(tmp_path / "lower.csv"), "--segment", "region", "--date", "week", "--plan-price",
                 "2.3", "--degrees", "0-1", "--no-loglog", "-o", str(tmp_path / "low.json"), "--ledger", str(book)]) == 0
    err = capsys.readouterr().err
    said = f"none of the {signed} signed series in {book} is in these results"
    assert said in err and "no signed series has new data" not in err
    before = book.read_bytes()
    said = f"none of the {signed} series in {book} is in these results"
    for command in (["show", str(tmp_path / "low.json"), "--ledger", str(book)],
                    ["ledger", "export", str(book), "--results", str(tmp_path / "low.json"), "-o",
                     str(tmp_path / "e.csv"), "-q"],
                    ["ledger", "carry", str(tmp_path / "low.json"), "--ledger", str(book), "-q"]):
        assert main(command) == 0
        err = capsys.readouterr().err
        assert said in err and len(err.splitlines()) == 1 and "warning" in err, command
    assert main(["ledger", "accept-unflagged", str(tmp_path / "low.json"), "--ledger", str(book)]) == 2
    err = capsys.readouterr().err
    assert said in err and "--new-series" in err and len(err.splitlines()) == 1
    assert book.read_bytes() == before  # nothing appended
    assert main(["ledger", "accept-unflagged", str(tmp_path / "low.json"), "--ledger", str(book), "-q",
                 "--new-series"]) == 0
    err = capsys.readouterr().err
    assert said in err and "warning" in err and len(err.splitlines()) == 1
    assert len(ledger.Ledger(book).histories) > signed and ledger.verify(book) == []
    # results sharing series with the ledger: no warning (only a note: the 'north' series accepted as new just now
    # are signed series these results hold only as 'North'); into an empty ledger, not a word
    fit_segmented(tmp_path / "region.csv", tmp_path / "again.json", "region", book)
    assert main(["show", str(tmp_path / "again.json"), "--ledger", str(book)]) == 0
    err = capsys.readouterr().err.splitlines()
    assert len(err) == 2 and all(": note: " in line and "are not in these results (each present only under another "
                                 "spelling: item 0 · north, …)" in line for line in err)
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(tmp_path / "new.jsonl"),
                 "-q"]) == 0
    assert capsys.readouterr().err == ""


def test_accept_unflagged_into_another_ledger_says_so_and_counts_not_its_shifted(tmp_path, capsys):
    """Results fitted with ``--ledger L`` accepted into another ledger: one warning line (the screen's and
    ``show --ledger``'s words), and ``shifted`` (L's signed curve failing) does not keep a series from an
    accept in a ledger where nothing stands on it (before: silent, and the series left out)."""
    book, other = tmp_path / "L.jsonl", tmp_path / "other.jsonl"
    first = first_cycle_signed(tmp_path, book)
    held = first["item 0"]  # the other ledger: one hold, on another series than the mover
    ledger.append(other, [ledger.Entry(series=held["key"], action="hold", fingerprint=held["fingerprint"],
                                       results="ab" * 32, note="look later", last_date=held["last_date"])],
                  ledger.Identity("ana", "ana", "host"))
    write_weeks(tmp_path / "c2.csv", 44, drop_from=0)  # the mover's demand 40% lower throughout: a clean fit
    second = fit(tmp_path / "c2.csv", tmp_path / "r2.json", book)
    assert [f["code"] for f in second[MOVER]["flags"]] == ["shifted"]  # L's signed curve, nothing else
    assert main(["fit", str(tmp_path / "c2.csv"), "--date", "week", "--plan-price", "2.3", "--degrees", "0-1",
                 "--no-loglog", "-o", str(tmp_path / "r2.parquet"), "--quiet", "--ledger", str(book)]) == 0
    from fitcore.ledger.proposals import unflagged
    for results in ("r2.json", "r2.parquet"):  # the record reader and the column reader alike
        assert MOVER in [key["product"] for key, *_ in unflagged(tmp_path / results, other)[1]]
        assert MOVER not in [key["product"] for key, *_ in unflagged(tmp_path / results, book)[1]]
    capsys.readouterr()
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r2.json"), "--ledger", str(other), "-q"]) == 0
    err = capsys.readouterr().err
    assert len(err.splitlines()) == 1 and f"backtested against {book}, not {other}" in err
    accepted = {h.latest["series"]["product"] for h in ledger.Ledger(other).histories.values()
                if h.latest["action"] == "accept"}
    assert MOVER in accepted
    # into its own ledger, nothing is said and shifted counts
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r2.json"), "--ledger", str(book), "-q"]) == 0
    assert capsys.readouterr().err == ""


def test_a_second_carry_counts_from_the_ledger_as_it_is_now(tmp_path, capsys):
    """A series left by the first carry and decided by hand since: a second carry counts it no more, as
    ``show --ledger`` lists it due nothing (before: the results' reasons, as at the fit, counted again)."""
    from fitcore.ledger.replay import series_id

    book = tmp_path / "L.jsonl"
    first_cycle_signed(tmp_path, book)
    write_weeks(tmp_path / "c2.csv", 44, drop_from=40)  # the mover's new weeks 40% lower: its backtest fails
    second = fit(tmp_path / "c2.csv", tmp_path / "r2.json", book)
    assert main(["fit", str(tmp_path / "c2.csv"), "--date", "week", "--plan-price", "2.3", "--degrees", "0-1",
                 "--no-loglog", "-o", str(tmp_path / "r2.parquet"), "--quiet", "--ledger", str(book)]) == 0
    assert carry_left(tmp_path / "r2.json", book, capsys)["backtest failed"] >= 1
    mover = second[MOVER]
    latest = ledger.Ledger(book).histories[series_id(mover["key"])].latest["digest"]
    ledger.append(book, [ledger.Entry(series=mover["key"], action="accept", fingerprint=mover["fingerprint"],
                                      results="ab" * 32, model=mover["chosen"], proposed=mover["chosen"],
                                      supersedes=latest)], ledger.Identity("ana", "ana", "host"))
    for results in ("r2.json", "r2.parquet"):
        dues = show_dues(tmp_path / results, book, capsys)
        assert carry_left(tmp_path / results, book, capsys) == dues, results
    assert "backtest failed" not in dues  # the mover, accepted by hand: due nothing


def test_ledger_show_names_the_columns_where_the_ledger_holds_several_key_sets(tmp_path, capsys):
    """A region=South and an area=South series read alike as "salt · South" (before); with several key sets in
    the ledger, each value but the product's is named by its column.  One key set: values only, as always."""
    book, one = tmp_path / "L.jsonl", tmp_path / "one.jsonl"
    who = ledger.Identity("ana", "ana", "host")
    for series in ({"product": "salt", "region": "South"}, {"area": "South", "product": "salt"}):
        ledger.append(book, [ledger.Entry(series=series, action="hold", fingerprint="f", results="ab" * 32)], who)
    ledger.append(one, [ledger.Entry(series={"product": "salt", "region": "South"}, action="hold", fingerprint="f",
                                     results="ab" * 32)], who)
    capsys.readouterr()
    assert main(["ledger", "show", str(book)]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0].endswith("salt · region=South") and lines[1].endswith("salt · area=South")
    assert main(["ledger", "show", str(one)]) == 0
    assert capsys.readouterr().out.rstrip().endswith("salt · South")


def test_dask_fit_says_results_sharing_no_series_with_the_ledger(tmp_path, capsys):
    """``fit --engine dask --ledger`` warns as the local fit does (before: silent, "0 signed series")."""
    import pytest
    pytest.importorskip("distributed")
    write_weeks(tmp_path / "w.csv", 40, seed=9)
    with_segment(tmp_path / "w.csv", tmp_path / "region.csv", "region")
    fit_segmented(tmp_path / "region.csv", tmp_path / "r1.json", "region")
    book = tmp_path / "L.jsonl"
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    with_segment(tmp_path / "w.csv", tmp_path / "lower.csv", "region", values=("north", "east"))
    capsys.readouterr()
    assert main(["fit", str(tmp_path / "lower.csv"), "--segment", "region", "--date", "week", "--plan-price", "2.3",
                 "--degrees", "0-1", "--no-loglog", "-o", str(tmp_path / "parts"), "--engine", "dask",
                 "--workers", "1", "--ledger", str(book)]) == 0
    err = capsys.readouterr().err
    assert f"none of the {len(ledger.Ledger(book).histories)} series in {book} is in these results" in err
    assert "ledger: none of its series is in these results" in err


def test_export_leaves_out_the_shifted_flags_of_a_backtest_against_another_ledger(tmp_path, capsys):
    """A trial: export read with another ledger than the results' fit said nothing, and its flags column carried
    'shifted' judged against the other ledger's signers (show, carry and the screen leave it out, and say so)."""
    book = tmp_path / "L.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    fit(tmp_path / "c1.csv", tmp_path / "r1.json")
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    other = tmp_path / "other.jsonl"
    other.write_bytes(book.read_bytes())
    write_weeks(tmp_path / "c2.csv", 46, drop_from=40, seed=9)  # one series' demand drops: shifted
    fit(tmp_path / "c2.csv", tmp_path / "r2.json", book)
    flags = {}
    for name, ledger_path in (("own", book), ("other", other)):
        capsys.readouterr()
        out = tmp_path / f"{name}.csv"
        assert main(["ledger", "export", str(ledger_path), "--results", str(tmp_path / "r2.json"), "-o", str(out),
                     "-q"]) == 0
        flags[name] = {row["product"]: row["flags"] for row in csv.DictReader(open(out, newline=""))}
        flags[name + " said"] = capsys.readouterr().err
    assert "shifted" in flags["own"][MOVER] and "backtested against" not in flags["own said"]
    assert not any("shifted" in codes for codes in flags["other"].values())
    assert flags["other"][MOVER] == " ".join(c for c in flags["own"][MOVER].split() if c != "shifted")
    assert (f"{tmp_path / 'r2.json'}: backtested against {book}, not {other}; its 'shifted' flags are left out of the "
            "export") in flags["other said"]
