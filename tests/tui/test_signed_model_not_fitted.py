"""A standing accept of a model these results did not fit (the sample accepted as shipped, where loglog is
proposed for many series, then refitted with ``--no-loglog``).  Before, the list row read as if the proposal
stood (no "proposes"), the evidence showed the proposal's numbers under "accepted" without a word, and ``a``
was hidden: nothing let the analyst sign the new proposal.  Now the row and the evidence say it, the signed
curve is drawn beside the proposal, and ``a`` is offered."""
from __future__ import annotations

from pathlib import Path

import pyarrow.parquet as pq

from fitcore.results.source import source_from_results
from pricefold.cli import main
from tests.tui.conftest import make_app, on_series, screen_text
from tui.widgets.evidence import EvidencePanel

SAMPLE = Path(__file__).resolve().parents[2] / "sample"


async def test_an_accepted_model_these_results_did_not_fit_is_said_and_the_proposal_can_be_accepted(tmp_path):
    book = tmp_path / "ledger.jsonl"
    assert main(["ledger", "accept-unflagged", str(SAMPLE / "results.parquet"), "--ledger", str(book), "-q"]) == 0
    assert main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week", "--plan",
                 str(SAMPLE / "plan.csv"), "--no-loglog", "-q", "-o", str(tmp_path / "r.parquet")]) == 0
    rows = pq.read_table(SAMPLE / "results.parquet", columns=["product", "region", "candidate", "is_chosen",
                                                              "flags"]).to_pylist()
    key = next({"product": r["product"], "region": r["region"]} for r in rows
               if r["is_chosen"] and r["candidate"] == "loglog" and r["flags"] == "[]")  # accepted as loglog
    app = make_app(book, source_from_results(tmp_path / "r.parquet"))
    async with app.run_test(size=(160, 50)) as pilot:
        s = await on_series(app, pilot, key)
        session = app.session
        proposal = session.results.names[int(session.results.chosen[s])]
        assert session.status[s] == "accepted" and "loglog" not in session.results.names
        await pilot.pause(0.5)
        text = screen_text(app)
        row = next(line for line in text.splitlines() if key["product"] in line and "obs" not in line)
        assert f"proposes {proposal}" in row, row
        words = " ".join(line.split("▕")[-1].strip() for line in text.splitlines())
        assert "which these results did not fit: its numbers are not here" in words, words
        assert f"The numbers below are {proposal}'s, these results' proposal" in words, words
        assert "a accept" in text.splitlines()[-1]
        legend = app.screen.query_one(EvidencePanel).query_one("#ev-curve").render()
        assert "signed loglog" in str(getattr(legend, "plain", legend))
