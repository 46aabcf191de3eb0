"""``show --ledger`` and the report's decisions table give a series an override stands on its own curve's flags,
as ``ledger export`` writes them, not the proposal's.

The invented series, their fits and the ledger are ``test_export_override_flags``'s (``run``): which overriding
curves rise and which go below zero is checked there apart from pricefold, on the results' plain power-basis
coefficients with numpy's ``Polynomial`` (``_shape``), and checked again here where a test leans on it.
"""
from __future__ import annotations

import re
from pathlib import Path

import pytest

from fitcore import ledger
from fitcore.review.candidate_checks import PROPOSAL_ONLY
from pricefold.cli import main
from tests.cli.test_export_override_flags import LOW, _codes, _rows, _shape, run  # noqa: F401 (a fixture)
from tests.fitcore.ledger_support import ANA


def _listed(capsys, results, book, *more) -> dict[str, list[str]]:
    """``show --ledger``'s list: product → the flag codes its row shows (one series shown in full: its own flags
    line, as ``test_one_series_in_full_says_the_overrides_flags`` reads it)."""
    assert main(["show", str(results), "--ledger", str(book), *more]) == 0
    lines = capsys.readouterr().out.splitlines()
    if not lines[0].startswith("series "):
        own = next(line for line in lines if line.startswith("  flags of "))
        assert "the analyst decides" in lines[-1]  # the caution of one series in full, however it was picked
        return {lines[0].split(" — ")[0]: own.split(": ", 1)[1].split()}
    out = {}
    for line in lines[1:]:
        flags = line.split("  ")[-1]
        out[line[:40].strip()] = [] if flags == "—" else flags.split()
    return out


def _results(run, tmp_path_factory, kind):
    if kind == "parquet":
        return run.parquet
    path = tmp_path_factory.mktemp("json") / "results.json"
    import json
    path.write_text(json.dumps(run.document))
    return path


def _own_shape(record, model):
    return _shape(next(c for c in record["candidates"] if c["name"] == model), *record["price_range"])


@pytest.mark.parametrize("kind", ["json", "parquet"])
def test_the_list_shows_an_overrides_own_flags(run, capsys, tmp_path_factory, kind):
    """The override to a flat or falling curve of a proposal that rises (numpy: no part of the range rises) says
    neither ``rising`` nor the proposal's fit's ``near-tie``/``weak-fit``; every overridden row's flags are the
    export row's."""
    listed = _listed(capsys, _results(run, tmp_path_factory, kind), run.book)
    exported = _rows(run.exported["json"])
    record, model = run.cases["proposal rises"]
    assert "rising" in _codes(record) and _own_shape(record, model)[0] == 0.0  # the case tests something
    shown = listed[record["key"]["product"]]
    assert "rising" not in shown and not set(shown) & {"near-tie", "weak-fit", *PROPOSAL_ONLY}, shown
    for name, (record, _) in run.cases.items():
        product = record["key"]["product"]
        assert listed[product] == exported[product]["flags"].split(), name


@pytest.mark.parametrize("kind", ["json", "parquet"])
def test_flag_below_zero_lists_an_override_going_below_zero(run, capsys, tmp_path_factory, kind):
    """``--flag below-zero`` lists the series whose override goes below zero (numpy: lowest volume < -5) though
    its proposal's flags do not say so, and no series whose override stays above zero."""
    listed = _listed(capsys, _results(run, tmp_path_factory, kind), run.book, "--flag", "below-zero")
    record, model = run.cases["below zero"]
    assert _own_shape(record, model)[1] < -LOW and "below-zero" not in _codes(record)
    assert record["key"]["product"] in listed
    for name, (record, model) in run.cases.items():
        assert (record["key"]["product"] in listed) == (_own_shape(record, model)[1] < 0), name


def test_flag_rising_leaves_out_an_override_that_does_not_rise(run, capsys):
    record, model = run.cases["proposal rises"]
    listed = _listed(capsys, run.parquet, run.book, "--flag", "rising")
    assert record["key"]["product"] not in listed
    rises = run.cases["rises, proposal near-tie"][0]["key"]["product"]
    assert rises in listed  # an override that rises (numpy) is listed though its proposal does not rise


def test_one_series_in_full_says_the_overrides_flags(run, capsys):
    record, model = run.cases["below zero"]
    assert main(["show", str(run.parquet), "--ledger", str(run.book), "--product", record["key"]["product"]]) == 0
    out = capsys.readouterr().out
    own = _rows(run.exported["json"])[record["key"]["product"]]["flags"]
    assert f"flags of {model} (the flags above are the proposal's): {own}\n" in out and "below-zero" in own


def test_the_reports_decision_row_of_an_override_has_the_export_rows_codes(run, tmp_path):
    """The overrides recorded one by one (the table lists decisions a person made one by one): each row's flags
    are its export row's."""
    book = tmp_path / "ledger.jsonl"
    digest = ledger.results_digest(run.document)
    for record, model in run.cases.values():
        ledger.append(book, [ledger.Entry(series=record["key"], action="override", fingerprint=record["fingerprint"],
                                          results=digest, model=model, proposed=record["chosen"], note="looked at",
                                          flags=_codes(record))], ANA)
    out = tmp_path / "report.html"
    assert main(["report", str(run.parquet), "--ledger", str(book), "-o", str(out)]) == 0
    page = out.read_text()
    exported = _rows(run.exported["json"])
    for name, (record, _) in run.cases.items():
        product = record["key"]["product"]
        row = re.search(rf"<tr data-status=\"overridden\"><td[^>]*>(?:<a[^>]*>)?{product}<.*?</tr>", page).group(0)
        cell = re.search(r"data-label=\"Flags\">(.*?)</td>", row).group(1)
        codes = re.findall(r"<span class=\"flag [^\"]*\"[^>]*>([a-z-]+)</span>", cell)
        assert sorted(codes) == sorted(exported[product]["flags"].split()), name
    # each override's section in full: its own curve's codes first, the sentences said to be the proposal's (they
    # read as the standing curve's: an override going below zero showed no below-zero; a trial)
    for name, (record, model) in run.cases.items():
        product = record["key"]["product"]
        article = re.search(rf"<article class=\"exception\" id=\"s\d+\"><h3>{product}</h3>.*?</article>", page, re.S)
        flags = article.group(0).split("<h4>Flags</h4>", 1)[1]
        lead = re.match(rf"<p><strong>{model}, which stands:</strong> (.*?)\.", flags)
        assert lead, (name, flags[:200])
        shown = re.findall(r"<span class=\"sev-[a-z]+\">([a-z-]+)</span>", lead.group(1))
        assert sorted(shown) == sorted(exported[product]["flags"].split()), name


def test_the_stands_line_of_an_override_at_a_plan_price_outside_the_range_says_extrapolation(tmp_path, capsys):
    """The screen said "an extrapolation" beside an override's number at a plan price outside the prices observed;
    show's 'stands:' line gave the number alone (a trial: the sample's lemons · East overridden to poly4, 2,520 at
    the plan price 3.96).  The shipped sample results; each series overridden to poly4 in a ledger."""
    import pyarrow.parquet as pq

    from fitcore.results.read import read_header
    results = Path(__file__).resolve().parents[2] / "sample" / "results.parquet"
    rows = [r for r in pq.read_table(results).to_pylist() if r["is_chosen"] and r["chosen"] != "poly4"]
    inside = next(r for r in rows if r["price_lo"] <= r["plan_price"] <= r["price_hi"])
    outside = next(r for r in rows if not r["price_lo"] <= r["plan_price"] <= r["price_hi"])
    book = tmp_path / "L.jsonl"
    digest = ledger.results_digest(read_header(results))
    for row in (inside, outside):
        ledger.append(book, [ledger.Entry(series={"product": row["product"], "region": row["region"]},
                                          action="override", fingerprint=row["fingerprint"], results=digest,
                                          model="poly4", proposed=row["chosen"], note="a look")], ANA)
    for row, far in ((inside, False), (outside, True)):
        capsys.readouterr()
        assert main(["show", str(results), "--ledger", str(book), "--product", row["product"], "--key",
                     f"region={row['region']}"]) == 0
        line = next(text for text in capsys.readouterr().out.splitlines() if "stands: poly4" in text)
        assert ("an extrapolation (outside the prices observed)" in line) == far, line


@pytest.mark.parametrize("kind", ["json", "parquet"])
def test_the_list_orders_as_the_report_and_the_screen(run, capsys, tmp_path_factory, kind):
    """``show --ledger`` lists in the order the report and the screen give (``test_report_shown_flags.attention``,
    the rule written out apart from pricefold): by the flags each row shows, then the score it shows — an
    override's own curve's Q², not its proposal's."""
    from tests.report.test_report_shown_flags import attention, shown_flags
    listed = list(_listed(capsys, _results(run, tmp_path_factory, kind), run.book))
    assert listed == attention(run, shown_flags(run))
