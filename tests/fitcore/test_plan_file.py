"""A plan file's faults, each one line naming the line, the column and what was found, worded as the data
loader words the same fault; key texts matched exactly, an empty key cell never read as the text 'nan'.

The files are small and invented; each case's line and cell are written into it by hand.
"""
from __future__ import annotations

import gzip

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from fitcore.data.dataset import from_columns
from fitcore.data.plan import read_plan
from fitcore.errors import DataError

PRODUCTS = ["apples", "NA", "nan", "null", "None", "Caf\u00e9"]  # text that some readers take for a missing value
REGIONS = ["North", "South"]
HEADER = "product,region,plan_price,promo\n"


@pytest.fixture(scope="module")
def data():
    keys = [(p, r) for p in PRODUCTS for r in REGIONS]
    product = np.repeat(np.array([k[0] for k in keys], dtype=object), 3)
    region = np.repeat(np.array([k[1] for k in keys], dtype=object), 3)
    n = len(product)
    return from_columns({"product": product, "region": region}, np.tile([1.0, 2.0, 3.0], len(keys)),
                        np.tile([9.0, 7.0, 4.0], len(keys)), controls={"promo": np.zeros(n)})


def priced(data, plan) -> dict:
    return {(data.keys["product"][s], data.keys["region"][s]): float(plan.price[s])
            for s in range(data.n_series) if np.isfinite(plan.price[s])}


def refused(data, path, **kw) -> DataError:
    with pytest.raises(DataError) as caught:
        read_plan(data, path, **kw)
    assert "\n" not in str(caught.value)
    return caught.value


@pytest.mark.parametrize("row, column", [(",North,9.99,0", "product"), ("apples,,9.99,0", "region"),
                                         ("   ,North,9.99,0", "product"), ('"",North,9.99,0', "product")])
def test_an_empty_key_cell_is_refused_not_read_as_nan(tmp_path, data, row, column):
    """Before: the empty product cell became the text 'nan' and priced the series whose product is 'nan'."""
    path = tmp_path / "plan.csv"
    path.write_text(HEADER + "apples,North,2.0,0\n" + row + "\n", encoding="utf-8")
    error = refused(data, path)
    assert (error.line, error.column) == (3, column)
    assert str(error) == f"{path}, line 3, column '{column}': expected a key value, found an empty cell"


def test_an_empty_key_in_a_parquet_plan_is_refused(tmp_path, data):
    path = tmp_path / "plan.parquet"
    pq.write_table(pa.table({"product": ["apples", None], "region": ["North", "South"], "plan_price": [2.0, 3.0]}),
                   path)
    error = refused(data, path)
    assert (error.row, error.column) == (2, "product") and "expected a key value, found an empty cell" in str(error)
    assert str(error).startswith(f"{path}, row 2, column")  # a Parquet row, as the data loader names one


@pytest.mark.parametrize("kind", ["csv", "csv-quoted", "parquet"])
def test_text_that_looks_missing_is_a_name_matched_exactly(tmp_path, data, kind):
    """'NA', 'nan', 'null', 'None' are product names: each plan line prices its own series, and only it."""
    prices = {(p, r): 1 + i / 10 for i, (p, r) in enumerate((p, r) for p in PRODUCTS for r in REGIONS)}
    if kind == "parquet":
        path = tmp_path / "plan.parquet"
        pq.write_table(pa.table({"product": [k[0] for k in prices], "region": [k[1] for k in prices],
                                 "plan_price": list(prices.values())}), path)
    else:
        path = tmp_path / "plan.csv"
        quote = '"' if kind == "csv-quoted" else ""  # quotes send the file to the line-by-line reader
        path.write_text(HEADER + "".join(f"{quote}{p}{quote},{r},{v},0\n" for (p, r), v in prices.items()),
                        encoding="utf-8")
    assert priced(data, read_plan(data, path)) == pytest.approx(prices)


@pytest.mark.parametrize("line6, said", [("apples,South,2.41", "expected 4 fields, found 3"),
                                         ("apples,South,2.41,0,9", "expected 4 fields, found 5")])
@pytest.mark.parametrize("ending", ["\n", "\r\n"])
def test_a_line_of_the_wrong_number_of_fields_says_so(tmp_path, data, line6, said, ending):
    """Before: 'column 'plan_price': expected a price above zero, found '2.41'' — the price was there."""
    rows = ["product,region,plan_price,promo", "NA,North,2,0", "NA,South,2,0", "nan,North,2,0", "nan,South,2,0",
            line6, "null,North,2,0"]
    path = tmp_path / "plan.csv"
    path.write_bytes(ending.join(rows).encode() + ending.encode())
    error = refused(data, path)
    assert (error.line, error.column) == (6, None) and str(error) == f"{path}, line 6: {said}"


def test_empty_lines_are_passed_over(tmp_path, data):
    """As the data loader reads an empty line (a row with nothing in it, rejected, never an error), a plan's
    empty lines carry no plan and stop nothing.  Before: 'line 3, column 'plan_price': expected a price'."""
    path = tmp_path / "plan.csv"
    path.write_text(HEADER + "apples,North,2.0,0\n\n  \napples,South,3.0,\n\n\n", encoding="utf-8")
    assert priced(data, read_plan(data, path, controls=("promo",))) == {("apples", "North"): 2.0,
                                                                        ("apples", "South"): 3.0}
    path.write_text(HEADER + "\n\n", encoding="utf-8")
    assert "expected at least one plan line, found only empty lines" in str(refused(data, path))


@pytest.mark.parametrize("last", ['"null,South,2,0', 'null,"South,2,0', 'null,South,"2,0'])
def test_a_quote_never_closed_on_the_last_line(tmp_path, data, last):
    """Before: 'line 4, column 'plan_price': expected a price above zero'."""
    path = tmp_path / "plan.csv"
    path.write_text(HEADER + "apples,North,2.0,0\nNA,South,2,0\n" + last + "\n", encoding="utf-8")
    error = refused(data, path)
    assert error.line == 4 and str(error).endswith(
        "line 4: a quote opens on this line, the last of the file, and is never closed; expected 4 fields a row")


@pytest.mark.parametrize("region, hint", [("north", "; did you mean 'North'?"), (" North ", "; did you mean 'North'?"),
                                          ("NORTH", "; did you mean 'North'?"), ("West", "")])
def test_a_key_no_series_has_names_its_column_and_the_spelling_the_data_has(tmp_path, data, region, hint):
    path = tmp_path / "plan.csv"
    path.write_text(HEADER + f"apples,{region},2.0,0\n", encoding="utf-8")
    error = refused(data, path)
    assert (error.line, error.column) == (2, "region")
    assert str(error).endswith(f"no series in the data has this key (product='apples', region='{region}'){hint}")


def test_a_product_spelled_in_another_unicode_form_is_pointed_to(tmp_path, data):
    path = tmp_path / "plan.csv"
    path.write_text(HEADER + "Cafe\u0301,North,2.0,0\n", encoding="utf-8")
    error = refused(data, path)
    # the plan's decomposed, the data's composed: both print 'Café', so the plan's is shown by code point, in the
    # key too (before: "this key (product='Café', …); did you mean 'Café' (composed; the plan's is …)")
    assert error.column == "product" and str(error).endswith(
        "this key (product='Cafe⟨U+0301⟩', region='North'); did you mean 'Caf\u00e9' (composed)?")
    assert "Cafe\u0301" not in str(error)


def test_a_key_whose_values_exist_apart_names_no_column(tmp_path):
    data = from_columns({"product": np.array(["a", "a", "b", "b"], dtype=object),
                         "region": np.array(["North", "North", "South", "South"], dtype=object)},
                        np.array([1.0, 2.0, 1.0, 2.0]), np.array([3.0, 2.0, 3.0, 2.0]))
    path = tmp_path / "plan.csv"
    path.write_text("product,region,plan_price\na,South,2.0\n", encoding="utf-8")
    error = refused(data, path)
    assert (error.line, error.column) == (2, None)
    assert str(error).endswith("line 2: no series in the data has this key (product='a', region='South')")


def test_a_control_cell_that_is_not_a_number_is_quoted(tmp_path, data):
    """Before: 'column 'promo': expected a number (or an empty cell for the default)', the cell unsaid."""
    path = tmp_path / "plan.csv"
    path.write_text(HEADER + "apples,North,2.0,0\napples,South,2.0,yes\n", encoding="utf-8")
    error = refused(data, path, controls=("promo",))
    assert (error.line, error.column) == (3, "promo")
    assert str(error).endswith("expected a number (or an empty cell for the default), found 'yes'")


@pytest.mark.parametrize("cell, expected", [
    ("soon", "expected an ISO date (or an empty cell for the default)"),
    # past what the date type holds: said with the data loader's range (before: only 'expected an ISO date')
    *((day, "expected an ISO date within 1677-09-22 to 2262-04-11 (the dates the date type holds, as for the "
            "data; or an empty cell for the default)") for day in ("2500-01-01", "1600-01-01"))])
def test_a_plan_date_that_cannot_be_used_is_quoted(tmp_path, data, cell, expected):
    path = tmp_path / "plan.csv"
    path.write_text(f"product,region,plan_price,plan_date\napples,North,2.0,{cell}\n", encoding="utf-8")
    error = refused(data, path, season=True)
    assert (error.line, error.column) == (2, "plan_date")
    assert str(error).endswith(f"{expected}, found '{cell}'")


def test_a_line_of_empty_cells_is_an_empty_key_not_an_empty_line(tmp_path, data):
    """',,,' has four cells, each empty: unlike an empty line it is a row, and its key is missing.
    Before: passed over silently."""
    path = tmp_path / "plan.csv"
    path.write_text(HEADER + "apples,North,2.0,0\n\n,,,\napples,South,3.0,0\n", encoding="utf-8")
    error = refused(data, path, controls=("promo",))
    assert (error.line, error.column) == (4, "product")
    assert str(error) == (f"{path}, line 4, column 'product': expected a key value, found an empty cell "
                          "(every cell of this line is empty)")


def test_a_parquet_row_of_empty_cells_is_an_empty_key(tmp_path, data):
    path = tmp_path / "plan.parquet"
    pq.write_table(pa.table({"product": ["apples", None], "region": ["North", None],
                             "plan_price": pa.array([2.0, None], pa.float64())}), path)
    error = refused(data, path)
    assert (error.row, error.column) == (2, "product") and "every cell of this row is empty" in str(error)


@pytest.mark.parametrize("blank", ["   ", "\t", " \t  "])
@pytest.mark.parametrize("quoted", [False, True])  # a quote in the file sends it to the line-by-line reader
def test_a_line_of_white_space_only_is_an_empty_line(tmp_path, data, blank, quoted):
    """As most CSV readers take it, and as the plan takes an empty line: passed over.  Before: 'expected 4
    fields, found 1'."""
    path = tmp_path / "plan.csv"
    first = '"apples",North,2.0,0' if quoted else "apples,North,2.0,0"
    path.write_text(HEADER + f"{first}\n{blank}\napples,South,3.0,0\n{blank}\n", encoding="utf-8")
    assert priced(data, read_plan(data, path)) == {("apples", "North"): 2.0, ("apples", "South"): 3.0}


@pytest.mark.parametrize("quoted", [False, True])
def test_a_line_of_white_space_only_in_the_data_is_an_empty_line(tmp_path, quoted):
    """The data loader reads it as the plan does: an empty line, rejected and counted as one."""
    from fitcore.data.loader import load_with_rejects
    path = tmp_path / "data.csv"
    first = '"a",1,5' if quoted else "a,1,5"
    path.write_text(f"product,price,volume\n{first}\n   \na,2,4\n", encoding="utf-8")
    data, rejects = load_with_rejects(path)
    assert data.n_series == 1 and rejects.lines.tolist() == [3] and rejects.reasons == ["empty line"]


def test_a_series_given_twice_names_both_lines(tmp_path, data):
    """Before: 'line 5: this series already has a plan price on an earlier line' — which one, unsaid."""
    path = tmp_path / "plan.csv"
    path.write_text(HEADER + "apples,North,2.0,0\nNA,North,2.0,0\nNA,South,2.0,0\nNA,North,3.0,0\n",
                    encoding="utf-8")
    error = refused(data, path)
    assert (error.line, error.column) == (5, None)
    assert str(error) == (f"{path}, line 5: expected one plan line per series, found a second for "
                          "product='NA', region='North' (the first is on line 3)")


def test_a_key_with_a_line_break_says_so(tmp_path, data):
    """A quote that closes on the next line puts a line break in the key.  The data may hold such a key
    (their reader keeps it, as this one does), so it is matched exactly; one no series has is said to hold
    a line break.  Before: only 'no series in the data has this key (product='NA␊', …)'."""
    path = tmp_path / "plan.csv"
    path.write_text(HEADER + 'apples,North,2.0,0\n"NA\n",South,2.0,0\n', encoding="utf-8")
    error = refused(data, path)
    assert (error.line, error.column) == (3, "product")
    assert str(error).endswith("no series in the data has this key (product='NA␊', region='South'); its product "
                               "holds a line break (a quote that closes on a later line than it opens); "
                               "did you mean 'NA'?")


def test_a_key_with_a_line_break_that_the_data_has_is_matched(tmp_path):
    data = from_columns({"product": np.array(["a\nb"] * 3 + ["a"] * 3, dtype=object)},
                        np.tile([1.0, 2.0, 3.0], 2), np.tile([9.0, 7.0, 4.0], 2))
    path = tmp_path / "plan.csv"
    path.write_text('product,plan_price\n"a\nb",2.5\na,3.5\n', encoding="utf-8")
    plan = read_plan(data, path)
    assert {data.keys["product"][s]: float(plan.price[s]) for s in range(2)} == {"a\nb": 2.5, "a": 3.5}


@pytest.mark.parametrize("end", ["\n", "", "\r\n"])
@pytest.mark.parametrize("gzipped", [False, True])
@pytest.mark.parametrize("other", ["", "NA,North,2,0,extra\n"])  # a wrong line sends it line by line
def test_a_quote_never_closed_in_the_last_field_of_the_last_line(tmp_path, data, end, gzipped, other):
    """The last line has its four fields (the open quote in the last one): before, read as '0' and accepted,
    by either reader.  The file cannot be read past it, so it is said before any row's fault."""
    import gzip
    path = tmp_path / ("plan.csv.gz" if gzipped else "plan.csv")
    text = (HEADER + other + "apples,North,2.0,0\n" + 'apples,South,2.0,"0' + end).encode()
    path.write_bytes(gzip.compress(text) if gzipped else text)
    line = 4 if other else 3
    assert str(refused(data, path)).endswith(f"line {line}: a quote opens on this line, the last of the file, and "
                                             "is never closed; expected 4 fields a row")


def test_a_last_line_whose_quotes_close_is_read(tmp_path, data):
    path = tmp_path / "plan.csv"
    path.write_text(HEADER + 'apples,North,2.0,0\napples,South,2.0,"0"', encoding="utf-8")
    assert priced(data, read_plan(data, path)) == {("apples", "North"): 2.0, ("apples", "South"): 2.0}


@pytest.mark.parametrize("cell", ["1e16", "-2e15", "1.0000001e15"])
def test_a_control_beyond_what_the_fit_carries_is_refused(tmp_path, data, cell):
    """The data loader rejects a control beyond ±1e15 (``validation.LARGEST``); the plan accepted it."""
    path = tmp_path / "plan.csv"
    path.write_text(HEADER + f"apples,North,2.0,0\napples,South,2.0,{cell}\n", encoding="utf-8")
    error = refused(data, path, controls=("promo",))
    assert (error.line, error.column) == (3, "promo")
    assert str(error).endswith(f"expected a number within ±1e15 (or an empty cell for the default), found '{cell}'")
    path.write_text(HEADER + "apples,North,2.0,1e15\napples,South,2.0,-1e15\n", encoding="utf-8")
    assert read_plan(data, path, controls=("promo",)).controls["promo"].tolist().count(1e15) == 1


@pytest.mark.parametrize("cell", ["inf", "-Infinity", "+INF", "nan", "NaN", "-nan", " nAn ", "1e400"])
def test_a_control_that_is_not_finite_is_refused_however_spelled(tmp_path, data, cell):
    path = tmp_path / "plan.csv"
    path.write_text(HEADER + f"apples,North,2.0,{cell}\n", encoding="utf-8")
    error = refused(data, path, controls=("promo",))
    assert error.column == "promo" and "expected a number" in str(error)


def test_a_parquet_control_that_is_not_finite_or_too_large_is_refused(tmp_path, data):
    path = tmp_path / "plan.parquet"
    for value in (float("nan"), float("inf"), 2e15):
        pq.write_table(pa.table({"product": ["apples"], "region": ["North"], "plan_price": [2.0],
                                 "promo": [value]}), path)
        assert refused(data, path, controls=("promo",)).column == "promo"


def test_a_plan_price_beyond_what_the_fit_carries_is_refused(tmp_path, data):
    path = tmp_path / "plan.csv"
    for cell in ("1e16", "inf", "1e400"):  # infinite ones too, not "expected a price above zero" (a trial)
        path.write_text(HEADER + f"apples,North,{cell},0\n", encoding="utf-8")
        error = refused(data, path)
        assert error.column == "plan_price" and str(error).endswith(f"expected a price of at most 1e15, found '{cell}'")


@pytest.mark.parametrize("kind", ["csv", "parquet"])
def test_a_plan_of_a_header_only_says_it_has_no_rows(tmp_path, data, kind):
    """Before: 'expected at least one observation, found only a header' (Parquet: 'found none'): the data's
    words."""
    if kind == "parquet":
        path = tmp_path / "plan.parquet"
        pq.write_table(pa.table({"product": pa.array([], pa.string()), "region": pa.array([], pa.string()),
                                 "plan_price": pa.array([], pa.float64())}), path)
    else:
        path = tmp_path / "plan.csv"
        path.write_text(HEADER, encoding="utf-8")
    found = "none" if kind == "parquet" else "only a header"
    assert str(refused(data, path)) == f"{path}: expected at least one plan row, found {found}"


@pytest.mark.parametrize("last", ['"\n', '"', '"   ', '"   \n', '"\r\n'])
@pytest.mark.parametrize("gz", [False, True])
def test_a_lone_quote_on_the_last_line_is_a_quote_never_closed(tmp_path, data, last, gz):
    """Before: passed over as an empty line (or 'expected a key value, found an empty cell (every cell…)' for
    '"\n'): the csv module ends the open cell at the end of the file, and its text is white space."""
    text = HEADER + "apples,North,2.0,0\n" + last
    path = tmp_path / ("plan.csv.gz" if gz else "plan.csv")
    path.write_bytes(gzip.compress(text.encode()) if gz else text.encode())
    error = refused(data, path)
    assert str(error) == (f"{path}, line 3: a quote opens on this line, the last of the file, and is never closed; "
                          "expected 4 fields a row")


def test_a_parquet_plan_names_rows_and_quotes_its_cells(tmp_path, data):
    """Before: 'line 3' for the third row, and a NaN price without what was found."""
    path = tmp_path / "plan.parquet"
    pq.write_table(pa.table({"product": ["apples", "apples", "NA"], "region": ["North", "South", "North"],
                             "plan_price": [2.0, 2.0, float("nan")]}), path)
    assert str(refused(data, path)) == f"{path}, row 3, column 'plan_price': expected a price above zero, found 'nan'"
    pq.write_table(pa.table({"product": ["apples", "NA", "apples"], "region": ["North", "North", "North"],
                             "plan_price": [2.0, 2.0, 3.0]}), path)
    assert str(refused(data, path)) == (f"{path}, row 3: expected one plan line per series, found a second for "
                                        "product='apples', region='North' (the first is row 1)")
    pq.write_table(pa.table({"product": ["apples", "pears"], "region": ["North", "North"],
                             "plan_price": [2.0, 2.0]}), path)
    assert refused(data, path).row == 2


@pytest.mark.parametrize("header, controls, season, said", [
    ("product,region,plan_price,promo", (), False, "plan column not used: 'promo' (no --control given)"),
    ("product,region,plan_price,promo", ("promo",), False, ""),
    ("product,region,plan_price,promo,plan_date,note", (), False,
     "plan columns not used: 'promo', 'note' (no --control given); 'plan_date' (no --season given)"),
    ("product,region,plan_price,promo,note,", ("promo",), True,
     "plan column not used: 'note' (not a key, plan_price, plan_date or --control column)")])
def test_plan_columns_a_fit_does_not_read_are_said(tmp_path, header, controls, season, said):
    """Before: a plan's promotion weeks fitted as regular ones without a word."""
    from fitcore.data.plan import unused_columns_note
    path = tmp_path / "plan.csv"
    path.write_text(header + "\n", encoding="utf-8")
    note = unused_columns_note(path, ("product", "region"), controls, season)
    assert note == (f"note: {path}: {said}" if said else "")
