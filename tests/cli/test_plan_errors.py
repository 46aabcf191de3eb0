"""``pricefold fit --plan`` on the sample with one fault put into its plan: exit 2, one line on stderr naming the
line and column, nothing written — and that line is the README's example of it, word for word."""
from __future__ import annotations

import re
from pathlib import Path

import pytest

from pricefold.cli import main

ROOT = Path(__file__).resolve().parents[2]
SAMPLE = ROOT / "sample"
README = " ".join((ROOT / "README.md").read_text(encoding="utf-8").split())


def plan_with(tmp_path: Path, line: int, edit) -> Path:
    lines = (SAMPLE / "plan.csv").read_text(encoding="utf-8").splitlines()
    lines[line - 1] = edit(lines[line - 1])
    path = tmp_path / "plan.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def said(capsys, tmp_path, data: Path, plan: Path, *more: str) -> tuple[int, list[str]]:
    capsys.readouterr()
    code = main(["fit", str(data), "--segment", "region", "--date", "week", "--plan", str(plan), *more,
                 "-q", "-o", str(tmp_path / "r.json")])
    err = capsys.readouterr().err.strip().splitlines()
    assert not (tmp_path / "r.json").exists() or code == 0
    return code, err


CASES = {
    "too few fields": (6, lambda text: text.rsplit(",", 1)[0], (), "line 6: expected 4 fields, found 3"),
    "an empty key cell": (2, lambda text: text.replace(",North,", ",,"), (),
                          "line 2, column 'region': expected a key value, found an empty cell"),
    "a control cell": (2, lambda text: re.sub(",0$", ",yes", text), ("--control", "promo"),
                       "column 'promo': expected a number (or an empty cell for the default), found 'yes'"),
    "a key spelled otherwise": (2, lambda text: text.replace("North", "north"), (),
                                "line 2, column 'region': no series in the data has this key "
                                "(product='apples 1 kg', region='north'); did you mean 'North'?"),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_a_plan_fault_is_the_readme_line(tmp_path, capsys, case):
    line, edit, options, words = CASES[case]
    plan = plan_with(tmp_path, line, edit)
    code, err = said(capsys, tmp_path, SAMPLE / "wholesale.csv", plan, *options)
    assert code == 2 and len(err) == 1 and err[0].endswith(words), err
    assert words in README


def test_an_empty_product_cell_does_not_price_the_product_named_nan(tmp_path, capsys):
    """Before: exit 0, and the 9.99 went to the series whose product is the text 'nan'."""
    data = tmp_path / "d.csv"
    data.write_text((SAMPLE / "wholesale.csv").read_text(encoding="utf-8").replace("\napples 1 kg,", "\nnan,"),
                    encoding="utf-8")
    plan = plan_with(tmp_path, 2, lambda text: ",North,9.99,0")
    code, err = said(capsys, tmp_path, data, plan)
    assert code == 2 and err == [f"pricefold fit: {plan}, line 2, column 'product': expected a key value, "
                                 "found an empty cell"]


def test_a_key_whose_values_are_all_in_the_data_but_spelled_otherwise_together(tmp_path, capsys):
    """Before: 'no series in the data has this key (product='café 250 g', region='East')' and no column, where the
    data's East series spells the product decomposed (each value is in the data, not together)."""
    import unicodedata
    composed = "caf\u00e9 250 g"  # an invented product
    rows = (SAMPLE / "wholesale.csv").read_text(encoding="utf-8").splitlines()
    renamed = [rows[0]] + [row.replace("apples 1 kg,", f"{composed},").replace(
        f"{composed},East,", f"{unicodedata.normalize('NFD', composed)},East,") for row in rows[1:]]
    data = tmp_path / "d.csv"
    data.write_text("\n".join(renamed) + "\n", encoding="utf-8")
    plan = tmp_path / "p.csv"
    plan.write_text(f"product,region,plan_price\n{composed},East,2.5\n", encoding="utf-8")
    code, err = said(capsys, tmp_path, data, plan)
    assert code == 2 and err == [f"pricefold fit: {plan}, line 2, column 'product': no series in the data has this key "
                                 f"(product='{composed}', region='East'); did you mean product='cafe⟨U+0301⟩ 250 g' "
                                 "(another Unicode form)?"]


@pytest.mark.parametrize("options, note", [
    ((), "note: {plan}: plan column not used: 'promo' (no --control given)"),
    (("--control", "promo"), None)])
def test_a_plan_column_the_fit_does_not_read_is_said_once(tmp_path, capsys, options, note):
    """The README's fit of the sample with its plan: the plan's promotion week is not read without --control promo.
    Before: nothing said."""
    plan = SAMPLE / "plan.csv"
    code, err = said(capsys, tmp_path, SAMPLE / "wholesale.csv", plan, *options)
    notes = [line for line in err if line.startswith(f"note: {plan}")]
    assert code == 0 and notes == ([note.format(plan=plan)] if note else [])
    assert note is None or note.format(plan="sample/plan.csv") in README
