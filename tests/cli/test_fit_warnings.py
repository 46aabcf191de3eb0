"""What ``pricefold fit`` warns about beside the rejected rows: prices of 0, a plan file that prices only
some series, and a file with no usable row (the first rejected cell, a decimal comma said as such).  The
expected counts are taken from the files with Python's csv module."""
from __future__ import annotations

import csv
from pathlib import Path

import pytest

from pricefold.cli import main

SAMPLE = Path(__file__).parents[2] / "sample"


def sample_rows():
    with open(SAMPLE / "wholesale.csv", newline="") as handle:
        return list(csv.DictReader(handle))


def write(path: Path, rows: list[dict], delimiter: str = ",") -> Path:
    with open(path, "w", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=list(rows[0]), delimiter=delimiter)
        writer.writeheader()
        writer.writerows(rows)
    return path


def fit(capsys, *args) -> tuple[int, list[str]]:
    code = main(["fit", *map(str, args), "--segment", "region", "--date", "week", "-q"])
    return code, capsys.readouterr().err.splitlines()


def test_prices_of_zero_are_counted_with_their_first_line(tmp_path, capsys):
    rows = sample_rows()
    for i in (1400, 1401, 2700):  # lines 1402, 1403 and 2702: a line number as the file counts it, no separator
        rows[i]["price"] = "0"
    data = write(tmp_path / "zeros.csv", rows)
    zero = [i + 2 for i, row in enumerate(csv.DictReader(open(data, newline=""))) if float(row["price"]) == 0]
    series = {(rows[i - 2]["product"], rows[i - 2]["region"]) for i in zero}
    code, said = fit(capsys, data, "-o", tmp_path / "r.parquet")
    assert code == 0
    (line,) = [text for text in said if "price of 0" in text]
    assert line.startswith(f"{data}, column 'price': {len(zero)} rows in {len(series)} series have a price of 0 "
                           f"(the first at line {min(zero)})")
    code, said = fit(capsys, SAMPLE / "wholesale.csv", "-o", tmp_path / "clean.parquet")
    assert code == 0 and not any("price of 0" in text for text in said)
    # weighted: a row of weight 0 is no observation, and makes no curve unavailable: not counted (it was)
    for i, row in enumerate(rows):
        row["w"] = "0" if i == 1400 else "1"
    data = write(tmp_path / "weighted.csv", rows)
    code, said = fit(capsys, data, "--weight", "w", "-o", tmp_path / "w.parquet")
    (line,) = [text for text in said if "price of 0" in text]
    assert code == 0 and line.startswith(f"{data}, column 'price': {len(zero) - 1} rows in ")


def test_a_plan_file_pricing_some_series_is_said(tmp_path, capsys):
    with open(SAMPLE / "plan.csv", newline="") as handle:
        plan = list(csv.DictReader(handle))
    part = write(tmp_path / "part.csv", plan[:7])
    keys = {(row["product"], row["region"]) for row in sample_rows()}
    priced = {(row["product"], row["region"]) for row in plan[:7]} & keys
    code, said = fit(capsys, SAMPLE / "wholesale.csv", "--plan", part, "-o", tmp_path / "r.parquet")
    assert code == 0
    order = list(dict.fromkeys((row["product"], row["region"]) for row in sample_rows()))
    unpriced = [key for key in order if key not in priced]  # the series in the file's order: the first is named
    assert f"{part}: prices {len(priced)} of {len(keys)} series; the other {len(keys) - len(priced)} (the first: " \
           f"{' · '.join(unpriced[0])}) have no plan price (no plan volume or interval, and no check of a plan price against the prices seen)" in said
    code, said = fit(capsys, SAMPLE / "wholesale.csv", "--plan", SAMPLE / "plan.csv", "-o", tmp_path / "all.parquet")
    assert code == 0 and not any("no plan price" in text for text in said)
    one_short = write(tmp_path / "one short.csv", [row for row in plan if (row["product"], row["region"]) != order[0]])
    code, said = fit(capsys, SAMPLE / "wholesale.csv", "--plan", one_short, "-o", tmp_path / "short.parquet")
    assert f"{one_short}: prices {len(keys) - 1} of {len(keys)} series; the other ({' · '.join(order[0])}) has no " \
           "plan price (no plan volume or interval, and no check of a plan price against the prices seen)" in said


@pytest.mark.parametrize("cell, hint", [("2,08", True), ("two", False)])
def test_no_usable_row_names_the_first_cell(tmp_path, capsys, cell, hint):
    rows = sample_rows()[:30]
    for row in rows:
        row["price"] = cell
    data = write(tmp_path / "semi.csv", rows, delimiter=";")
    code, said = fit(capsys, data, "--sep", ";", "-o", tmp_path / "r.parquet")
    assert code == 2 and len(said) == 1
    assert said[0].startswith(f"pricefold fit: {data}, line 2, column 'price': no usable rows (30 rows rejected: "
                              f"30 non-numeric price); the first is non-numeric price: {cell!r}")
    assert ("a decimal comma? numbers are read with a decimal point: 2.08" in said[0]) is hint
    assert not (tmp_path / "r.parquet").exists()


def test_a_run_that_rejects_most_rows_for_their_dates_says_to_check_the_dates(tmp_path, capsys):
    """Before: "…: unparseable week: check the delimiter (--sep), the columns and the decimal mark", with
    neither the cell nor the form a date is read in."""
    rows = [row for row in sample_rows() if row["product"] == "apples 1 kg" and row["region"] == "North"][:30]
    for row in rows[:20]:
        year, month, day = row["week"].split("-")
        row["week"] = f"{day}/{month}/{year}"
    code, said = fit(capsys, write(tmp_path / "d.csv", rows), "-o", tmp_path / "r.parquet")
    assert code == 0
    (line,) = [text for text in said if "rejected" in text]
    day, month, year = rows[0]["week"].split("/")
    assert line.endswith(f"; that is 20 of the 30 rows read, the first at line 2, column 'week': unparseable week: "
                         f"'{day}/{month}/{year}' (expected an ISO date such as 2024-01-31): check the dates' format "
                         "(--strict fails such a run)"), line


@pytest.mark.parametrize("bad, said_most", [(2, False), (20, True)])
def test_a_run_that_rejects_most_rows_says_so(tmp_path, capsys, bad, said_most):
    rows = [row for row in sample_rows() if row["product"] == "apples 1 kg" and row["region"] == "North"][:30]
    for row in rows[:bad]:
        row["price"] = "n/a"
    code, said = fit(capsys, write(tmp_path / "d.csv", rows), "-o", tmp_path / "r.parquet")
    assert code == 0
    (line,) = [text for text in said if "rejected" in text]
    assert line.startswith(f"{bad} rows rejected: {bad} non-numeric price — see {tmp_path / 'r.rejects.csv'}")
    assert (f"; that is {bad} of the 30 rows read, the first at line 2, column 'price': non-numeric price: 'n/a': "
            "check the delimiter" in line) is said_most


def test_the_first_rejected_line_is_written_as_an_editor_counts_it(tmp_path, capsys):
    """Line numbers are for ``sed -n 1999p`` or an editor's go-to-line: no thousands separator."""
    rows = sample_rows()[:4000]
    for row in rows[1997:]:  # over half rejected, so the first is said
        row["price"] = "n/a"
    code, said = fit(capsys, write(tmp_path / "d.csv", rows), "-o", tmp_path / "r.parquet")
    (line,) = [text for text in said if "rows rejected" in text]
    assert code == 0 and "the first at line 1999, column 'price'" in line, line


@pytest.mark.parametrize("cell, said_after", [
    ("2,20", ", found '2,20' (a decimal comma? numbers are read with a decimal point: 2.20)"),
    ("abc", ", found 'abc'"), ("-1.5", ", found '-1.5'")])
def test_a_bad_plan_price_names_its_cell(tmp_path, capsys, cell, said_after):
    """As a data file's first rejected cell is named (above), a plan file's bad price is, as written there."""
    with open(SAMPLE / "plan.csv", newline="") as handle:
        plan = list(csv.DictReader(handle))
    plan[2]["plan_price"] = cell
    part = write(tmp_path / "plan.csv", plan, delimiter=";")
    code, said = fit(capsys, SAMPLE / "wholesale.csv", "--plan", part, "-o", tmp_path / "r.parquet")
    assert code == 2
    assert said == [f"pricefold fit: {part}, line 4, column 'plan_price': expected a price above zero{said_after}"]


def test_most_rows_duplicates_of_a_series_and_date_point_at_the_key_columns(tmp_path, capsys):
    """The sample fitted without --segment region: three regions' weeks one series, two thirds of the rows
    duplicates — the advice was "check the delimiter (--sep), the columns and the decimal mark"."""
    code = main(["fit", str(SAMPLE / "wholesale.csv"), "--date", "week", "-o", str(tmp_path / "r.json"), "-q"])
    (line,) = [text for text in capsys.readouterr().err.splitlines() if "rejected" in text]
    assert code == 0 and line.endswith(": check the key columns (a --segment left out makes several series one, their "
                                       "dates repeated) (--strict fails such a run)"), line


@pytest.mark.parametrize("controlled", [False, True])
def test_a_fit_that_will_compile_first_says_so_and_one_that_will_not_is_silent(tmp_path, capsys, monkeypatch,
                                                                               controlled):
    """The first fit after an install compiled for ~9 s with nothing on screen, its progress line only at the end
    (a trial read the engine as seven times slower).  The cache is judged by the loop the fit will use: a fit with
    controls has its own (``controlled_fit``), the plain one ``family_fit``; said to a terminal, as the progress
    line is: -q, or stderr a file or pipe (a log, a test's capture), says nothing."""
    import io

    import fitcore.compiled

    class Terminal(io.StringIO):
        def isatty(self) -> bool:
            return True
    cold = {"controlled_fit" if controlled else "family_fit"}
    monkeypatch.setattr(fitcore.compiled, "looks_compiled",
                        lambda module="kernels", loop="family_fit": loop not in cold)
    extra = ["--control", "promo"] if controlled else []
    data = write(tmp_path / "d.csv", sample_rows()[:600])

    def said(quiet: list, terminal: bool) -> bool:
        err = Terminal() if terminal else io.StringIO()
        monkeypatch.setattr("sys.stderr", err)
        assert main(["fit", str(data), "--segment", "region", "--date", "week", *extra, "-o",
                     str(tmp_path / "r.json"), *quiet]) == 0
        return "note: compiling the engine's loops first (once after an install" in err.getvalue()
    assert said([], True) and not said(["-q"], True) and not said([], False)
    cold.clear()  # compiled now
    assert not said([], True)


def test_a_terminal_sees_what_the_fit_is_doing_and_every_line_said_starts_clean(tmp_path, monkeypatch):
    """The progress bar covered the fit alone: on 7M rows the screen stayed blank for 5 s of reading and 2 s of
    writing (a trial).  Reading, checking and writing are said on the same line, which is cleared before any line
    is printed — an error's too."""
    import io

    class Terminal(io.StringIO):
        def isatty(self) -> bool:
            return True
    data = write(tmp_path / "d.csv", sample_rows()[:600])
    (tmp_path / "bad.csv").write_text("product,price,volume\na,1,x\n")
    shown = {}
    for name, args in (("good", [str(data), "--segment", "region", "-o", str(tmp_path / "r.json")]),
                       ("bad", [str(tmp_path / "bad.csv"), "-o", str(tmp_path / "b.json")])):
        err = Terminal()
        monkeypatch.setattr("sys.stderr", err)
        main(["fit", *args])
        shown[name] = err.getvalue()
    good = shown["good"]
    for step in ("\rreading d.csv …\x1b[K", "\rchecking the curves …\x1b[K", "\rwriting r.json …\x1b[K"):
        assert step in good
    # what a terminal shows of each printed line: the text after its last carriage return (and clear)
    for text in (shown["good"], shown["bad"]):
        printed = [line.rsplit("\r", 1)[-1].replace("\x1b[K", "") for line in text.split("\n") if line]
        assert printed and not any("…" in line for line in printed), printed
    assert shown["bad"].rsplit("\r\x1b[K", 1)[-1].startswith(f"pricefold fit: {tmp_path / 'bad.csv'}, line 2, column")


def test_an_influential_row_of_a_parquet_file_is_placed_by_row_not_line(tmp_path):
    """Where the loader's errors place a Parquet file's rows ('row N'), the influential-point sentence said
    'line N' of one (a trial).  The sample fitted from its CSV and from a Parquet copy: the same observations,
    the CSV's line numbers one more than the Parquet's row numbers (the header line)."""
    import json
    import re

    import pyarrow.csv as pv
    import pyarrow.parquet as pq
    copy = tmp_path / "wholesale.parquet"
    pq.write_table(pv.read_csv(SAMPLE / "wholesale.csv"), copy)
    said = {}
    for name, data in (("csv", SAMPLE / "wholesale.csv"), ("parquet", copy)):
        out = tmp_path / f"{name}.json"
        assert main(["fit", str(data), "--segment", "region", "--date", "week", "-o", str(out), "-q"]) == 0
        said[name] = [f["message"] for s in json.loads(out.read_text())["series"] for f in s["flags"]
                      if f["code"] == "influential-point"]
    assert said["csv"] and len(said["csv"]) == len(said["parquet"])
    for text, parquet in zip(said["csv"], said["parquet"]):
        line = int(re.search(r"on line (\d+),", text)[1])
        assert f"on row {line - 1}," in parquet and "on line" not in parquet


def test_the_status_line_fits_the_terminal_and_a_dumb_terminal_gets_none(tmp_path, monkeypatch):
    """A status longer than the terminal wrapped, and the carriage return redrew its last row only: a long file
    name left 'reading weekly_sales_extract_…' on screen above the summary (a trial, 80 columns).  TERM=dumb
    showed the clearing escape as text."""
    import io

    from fitcore.widths import cells

    class Terminal(io.StringIO):
        def isatty(self) -> bool:
            return True
    data = write(tmp_path / f"weekly_sales_extract_for_the_planning_cycle_{'x' * 60}.csv", sample_rows()[:600])
    monkeypatch.setenv("COLUMNS", "40")
    err = Terminal()
    monkeypatch.setattr("sys.stderr", err)
    assert main(["fit", str(data), "--segment", "region", "-o", str(tmp_path / "r.json")]) == 0
    drawn = [part.split("\x1b[K")[0] for part in err.getvalue().split("\r")[1:]]
    assert any(part.startswith("reading weekly_sa") and part.endswith(".csv …") and "…" in part[:-2]
               for part in drawn)
    assert all(cells(part) <= 39 for part in drawn if "\n" not in part)
    monkeypatch.setenv("TERM", "dumb")
    err = Terminal()
    monkeypatch.setattr("sys.stderr", err)
    assert main(["fit", str(data), "--segment", "region", "-o", str(tmp_path / "r.json")]) == 0
    assert "\x1b" not in err.getvalue() and "\r" not in err.getvalue() and "fitted 6 series" in err.getvalue()


def test_a_large_json_write_says_parquet_is_faster(tmp_path, monkeypatch):
    """800k rows written as JSON took 11–12 s after a 2 s fit with only 'writing big.json …' on screen (a trial):
    past ``JSON_SERIES`` series the line says JSON is slow; a Parquet output, or fewer series, not."""
    import io

    class Terminal(io.StringIO):
        def isatty(self) -> bool:
            return True
    data = write(tmp_path / "d.csv", sample_rows()[:600])
    said = {}
    for limit, out in ((1, "r.json"), (1, "r.parquet"), (10_000, "s.json")):
        monkeypatch.setattr("pricefold.fit_run.JSON_SERIES", limit)
        err = Terminal()
        monkeypatch.setattr("sys.stderr", err)
        assert main(["fit", str(data), "--segment", "region", "-o", str(tmp_path / out)]) == 0
        said[out] = "Parquet is faster" in err.getvalue()
    assert said == {"r.json": True, "r.parquet": False, "s.json": False}
