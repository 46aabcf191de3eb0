"""``show`` says which season the curves of a fit with ``--season`` are held at: the plan date's, or the year's
average where the plan gives no date (a date's sin and cos are never both 0)."""
from __future__ import annotations

import pytest

from pricefold.cli import main
from tests.fitcore.controls_support import weekly


@pytest.mark.parametrize("plan_date, held", [(None, "the season's average over the year (no plan date given)"),
                                              ("2025-08-01", "the season at the plan date (1 Aug)")])
def test_show_says_which_season_the_curves_are_held_at(plan_date, held, tmp_path, capsys):
    data = weekly("2025-01-06", 20)
    rows = ["product,week,price,volume"] + [f"sprocket,{str(d)[:10]},{p},{v}" for d, p, v in
                                            zip(data.date, data.price, data.volume)]
    (tmp_path / "d.csv").write_text("\n".join(rows) + "\n")
    (tmp_path / "p.csv").write_text("product,plan_price" + (",plan_date" if plan_date else "") + "\n"
                                    + "sprocket,3.0" + (f",{plan_date}" if plan_date else "") + "\n")
    assert main(["fit", str(tmp_path / "d.csv"), "--date", "week", "--season", "1", "--plan", str(tmp_path / "p.csv"),
                 "-o", str(tmp_path / "r.json"), "-q"]) == 0
    capsys.readouterr()
    assert main(["show", str(tmp_path / "r.json")]) == 0
    out = capsys.readouterr().out
    assert f"controls held at the plan's values: {held}\n" in out and "outside-range" in out
