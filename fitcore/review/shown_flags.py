"""The flags each series shows, where a decision may have put another curve than the proposal in the plan.

A ``Diagnosis`` holds the flags of each series' proposal.  Where an override stands on the series' data, its
row shows that curve's own flags instead (``candidate_checks.standing_codes_in``: the override dialog's checks,
the series' data flags kept, the proposal's fit flags dropped), and its row's score is that curve's Q².
``shown_raised`` gives that matrix and ``shown_order`` the attention order by it and those scores: one source for
what the report counts, lists and orders and what the triage list filters, counts and sorts, so a page or a
screen never ranks a row by flags (or a score) it does not show.
"""
from __future__ import annotations

from typing import Mapping

import numpy as np

from ..fit.results import Results
from .flags import CODES, Diagnosis, attention_of


def shown_raised(diagnosis: Diagnosis, overrides: Mapping[int, tuple[str, dict | None]],
                 known: dict | None = None) -> np.ndarray:
    """(S, len(CODES)) bool, read-only: the flags each series shows — the diagnosis's, but where an override
    stands on the series' data (``overrides``: series → the model it makes stand, not the proposal, and the
    decision's ``signed`` snapshot, read where these results did not fit that model), that curve's own
    (``override_codes``).  A stale override is not one: it shows the proposal's flags and ``stale``.  The
    diagnosis's own array where no override stands: nothing is copied or checked."""
    raised = diagnosis.raised
    if not overrides:
        return raised
    raised = raised.copy()
    for s, (model, snapshot) in overrides.items():
        raised[s] = np.isin(CODES, override_codes(diagnosis, s, model, snapshot, known))
    raised.flags.writeable = False
    return raised


def override_codes(diagnosis: Diagnosis, s: int, model: str, snapshot: dict | None,
                   known: dict | None = None) -> tuple[str, ...]:
    """The codes series ``s`` shows where an override makes ``model`` stand on its data: the diagnosis's read for
    that curve (``candidate_checks.standing_codes_in``), in the order of ``flags.CODES``.  ``known``: the caller's
    memo of each override's codes, kept across calls (the screen checks each override once a session)."""
    codes = tuple(code for code, hit in zip(CODES, diagnosis.raised[s]) if hit)
    key = (id(diagnosis.results), s, model, codes)
    own = None if known is None else known.get(key)
    if own is None:
        from .candidate_checks import standing_codes_in  # its curves' loops: with the first override only
        own = tuple(standing_codes_in(diagnosis.results, s, model, codes, snapshot, diagnosis.thresholds,
                                      diagnosis.controls_outside(s)))
        if known is not None:
            known[key] = own
    return own


def shown_scores(results: Results, overrides: Mapping[int, tuple[str, dict | None]]) -> np.ndarray:
    """(S,) the score each series' row shows: the proposal's Q² (``results.score``), an override's its own curve's
    (NaN, the lowest, where these results did not fit that model or could not)."""
    score = np.array(results.score, dtype=float)
    for s, (model, _) in overrides.items():
        c = results.names.index(model) if model in results.names else -1
        score[s] = float(results.q2[s, c]) if c >= 0 and results.available[s, c] else np.nan
    return score


def shown_order(diagnosis: Diagnosis, raised: np.ndarray, overrides: Mapping[int, tuple[str, dict | None]]
                ) -> np.ndarray:
    """Series in attention order as their rows read: by the flags ``raised`` (``shown_raised`` of these
    ``overrides``) and the scores shown (``shown_scores``); the diagnosis's own order where no override stands."""
    if not overrides:
        return diagnosis.attention_order()
    return attention_of(raised, shown_scores(diagnosis.results, overrides))
