"""The list's "lowest score" order follows the score the list shows: the Q² of the model that stands on a series
(an override's own), not always the proposal's (a trial read 83% listed below 97%)."""
from __future__ import annotations

import numpy as np

from tests.tui.conftest import ANA
from tui.factory import open_session, sample_source


def test_lowest_score_orders_by_the_score_each_row_shows(tmp_path):
    session = open_session(sample_source(), tmp_path / "ledger.jsonl", ANA)
    results = session.results
    # a series whose worst available candidate scores far below its proposal: overridden to that candidate
    gap = [(float(results.score[s]) - float(np.nanmin(np.where(results.available[s], results.q2[s], np.nan))), s)
           for s in range(results.n_series) if results.available[s].sum() >= 2 and np.isfinite(results.score[s])]
    _, s = max(gap)
    worst = int(np.nanargmin(np.where(results.available[s], results.q2[s], np.nan)))
    session.decide(session.look(s), "override", results.names[worst], note="the test's override")
    session.reload_ledger(force=True)
    session.set_filter("all", None)
    session.set_sort("score")
    shown = [session.listed_model(int(i))[1] for i in session.view]
    shown = [-np.inf if np.isnan(v) else v for v in shown]
    assert shown == sorted(shown)  # ascending as the rows read
    assert session.listed_model(s)[1] == float(results.q2[s, worst]) < float(results.score[s])
