"""What stands on each series of a triage session: the ledger's decision, the model it made stand, and what a
signed series whose data changed is due (no widget).

A mixin of ``TriageSession``, which gives it ``results``, ``keys``, ``status``, ``status_code``, ``histories``,
``backtest``, ``_id``, ``result_flags``, ``flag_codes``, ``diagnosis``, ``base_diagnosis``, ``last_date`` and
``accepted_other_mask`` (kept by ``mark_accepted_other``).
"""
from __future__ import annotations

import math

import numpy as np

from fitcore.ledger.rules import decided_on_newer
from fitcore.review.flags import SEVERITY

from .ledger_series import CODE, fingerprint_reader
from .text import clean


class Standing:
    """The decisions standing on the session's series, and the models they made stand."""

    def due(self, s: int) -> str | None:
        """What a signed series whose data changed needs (backtest failed, shifted, no dates, …): what the ledger's
        records say first (``recorded_due``: decided on newer data — the ledger refuses decisions here —, held,
        changed since the fit of a results file's own backtest, revoked), as ``show --ledger`` and carry say it;
        else the backtest's word (a live one, made here against this ledger, once the rows are fitted)."""
        if self.status[s] != "stale":
            return None
        from fitcore.ledger.backtest import StoredBacktest, within_one_se
        from fitcore.ledger.due import recorded_due
        stored = isinstance(self.backtest, StoredBacktest)  # its fit read the ledger at its own time
        found = recorded_due(self.histories.get(self._id(s)), lambda: self.decided_on_newer(s),
                             self.backtest_of(s) if stored else None, stored)
        if found is not None:
            return found
        if self.backtest is not None and self.backtest_of(s) is not None:  # carry's own rule (``left_for_human``)
            results, record = self.results, self.backtest_of(s)
            names = results.names
            c = names.index(record["candidate"]) if record.get("candidate") in names else -1
            decision = self.decision(s)
            near = record["signed_near_best"] if "signed_near_best" in record else (  # results made before it
                c >= 0 and within_one_se(np.asarray(results.cv_mse[s], dtype=float),
                                         np.asarray(results.cv_se[s], dtype=float), np.asarray(results.available[s]), c))
            override = decision is not None and decision["action"] == "override"
            kept = bool(near) if override else None
            stops = [code for code in self.due_codes(s, record["candidate"] if override else None)
                     if SEVERITY[code] == "stop"]
            found = self.backtest.due(s, stops, bool(results.chosen[s] >= 0), kept)
        return found or "a new look (no backtest here)"

    def due_codes(self, s: int, override: str | None) -> list[str]:
        """The flag codes whose stop flags stale series ``s`` is due by: where the decision its backtest tested is an
        override (of the model ``override``), those of the curve a carry would make stand on these data
        (``candidate_checks.carried_codes_in``, as ``ledger carry`` judges them and ``show --ledger`` says them);
        else the results' (``result_flags``: its proposal's)."""
        codes = list(self.result_flags(s))
        if override is None:
            return codes
        from fitcore.review.candidate_checks import carried_codes_in
        diagnosis = self.base_diagnosis
        return carried_codes_in(diagnosis.results, s, override, codes, diagnosis.thresholds,
                                diagnosis.controls_outside(s))

    def decided_on_newer(self, s: int) -> bool:
        """Whether the decision standing on series ``s`` was made on newer data than these results' rows: the
        ledger refuses an accept, override or hold here (``rules.newer_standing``)."""
        if self.status[s] != "stale":
            return False
        return decided_on_newer(self.keys.key_of(s), self.results.data.fingerprint_of(s), self.last_date(s),
                                self.histories.get(self._id(s))) is not None

    def signed_model(self, s: int, model: str | None) -> dict | None:
        """The ``signed`` snapshot of ``model`` on series ``s`` as the results hold it (incomplete, and
        saying so, when they lack the interval parts: results read back before their rows arrived)."""
        from fitcore.ledger.snapshot import from_results
        if model not in self.results.names:
            return None
        return from_results(self.results, [s], self.results.names.index(model))[0]

    def history(self, s: int) -> list[dict]:
        history = self.histories.get(self._id(s))
        return history.records if history else []

    def standing(self, s: int) -> dict | None:
        """The decision standing on series ``s`` (None when pending)."""
        history = self.histories.get(self._id(s))
        return history.current if history else None

    def decision(self, s: int) -> dict | None:
        """The analyst's decision standing on series ``s``: the standing record, or the accept or override a
        standing carry carries forward (its analyst and note); None when pending."""
        history = self.histories.get(self._id(s))
        return history.decision if history else None

    def _standing_name(self, s: int) -> str | None:
        """The name of the model an accept or override standing on series ``s``'s current data made stand (made
        on them or carried to them; ``SeriesHistory.standing_model``); None where none stands."""
        if self.status[s] not in ("accepted", "overridden"):  # else none stands on these data: skip the lookup
            return None
        return self.histories[self._id(s)].standing_model(self.results.data.fingerprint_of(s))

    def model_of(self, s: int) -> int:
        """The candidate that now stands for series ``s``: an accept's or override's on the current data, else
        the proposal (also where these results did not fit the standing model: ``standing_absent``)."""
        name = self._standing_name(s)
        if name in self.results.names:
            return self.results.names.index(name)
        return int(self.results.chosen[s])

    def accepted_other(self, s: int) -> str | None:
        """The proposal of these results where an accept of another model stands on series ``s`` (accepted as
        the proposal of results fitted otherwise on the same data, perhaps a candidate these did not fit), else
        None: the screen says so, since the flags and the proposal's words are these results' own."""
        if self.status[s] != "accepted":
            return None
        return self._not_proposed(s, self._standing_name(s))

    def _not_proposed(self, s: int, name: str | None) -> str | None:
        """These results' proposal for series ``s`` ("nothing" where they propose none) when the accepted model
        ``name`` is not it; None when it is (or no accept stands)."""
        chosen = int(self.results.chosen[s])
        proposal = self.results.names[chosen] if chosen >= 0 else None
        if name is None or name == proposal:
            return None
        return proposal or "nothing"

    def mark_accepted_other(self, changed: dict[int, str], fingerprint=None) -> None:
        """``accepted_other_mask`` for the series ``changed`` (index → series id), whose statuses (or results) just
        changed: the list's "needs attention" takes in an accept of a model these results do not propose.  Only
        the accepted series are asked, their fingerprints read as ``set_statuses`` reads them (``fingerprint``:
        its reader where the caller has one)."""
        at = np.fromiter(changed, dtype=np.int64, count=len(changed))
        self.accepted_other_mask[at] = False
        accepted = at[self.status_code[at] == CODE["accepted"]].tolist()
        fingerprint = fingerprint or fingerprint_reader(self.results.data, len(accepted))
        for s in accepted:
            name = self.histories[changed[s]].standing_model(fingerprint(s))
            self.accepted_other_mask[s] = self._not_proposed(s, name) is not None

    def standing_absent(self, s: int) -> str | None:
        """The model an accept or override on these data made stand for series ``s``, where these results did
        not fit it (``--no-loglog``, fewer degrees): ``model_of`` falls back to the proposal, whose numbers the
        screen then shows, saying so; None where the standing model is here, or none stands."""
        name = self._standing_name(s)
        return name if name is not None and name not in self.results.names else None

    def listed_scores(self) -> np.ndarray:
        """(S,) the list's score (``listed_model``) of every series, for the list's "lowest score" order: the
        proposal's Q², but where a decision makes another model stand (an override, an accept of another fit's
        proposal, a stale decision), that model's — the order read 83% below 97% before."""
        score = np.array(self.results.score, dtype=float)
        other = np.isin(self.status, ("overridden", "stale")) | self.accepted_other_mask
        for s in np.flatnonzero(other).tolist():
            score[s] = self.listed_model(s)[1]
        return score

    def listed_model(self, s: int) -> tuple[str, float]:
        """The list's model and score for series ``s``: the model signed wherever an accept or override stands
        (carried or not, stale too: what ``ledger export`` and ``show --ledger`` give; ``↺`` marks a stale
        override, as the status mark does an override on these data), else this cycle's proposal; the score
        is that shape's Q² on these data."""
        results = self.results
        decision = self.decision(s) if self.status[s] in ("accepted", "overridden", "stale") else None
        if decision is not None and decision["action"] in ("accept", "override") and decision.get("model"):
            name = str(decision["model"])
            c = results.names.index(name) if name in results.names else -1
            score = float(results.q2[s, c]) if c >= 0 and results.available[s, c] else math.nan
            if c == int(results.chosen[s]):
                score = float(results.score[s])
            # ↺: an override, where the status mark does not say it already (a stale series' mark is stale's)
            stale_override = decision["action"] == "override" and self.status[s] == "stale"
            return clean(name) + ("↺" if stale_override else ""), score
        model = self.model_of(s)
        name = results.names[model] if model >= 0 else "—"
        # the score of the model that stands: an override's own Q², not the proposal's
        score = results.q2[s, model] if 0 <= model != results.chosen[s] else results.score[s]
        return name, float(score)

    def listed_flags(self, s: int) -> list[str]:
        """The list's flags of series ``s``, stop flags first: where an override stands on its data (not stale), its
        own curve's — the override dialog's checks (``candidate_checks``) read for that candidate, as ``ledger
        export`` and ``show --ledger`` give them; else the results' (``flag_codes``: a pending series', an accept's,
        and beside ``proposes`` an accept of another fit's proposal)."""
        override = self.override_of(s)
        if override is None:
            return self.flag_codes(s)
        from fitcore.review.shown_flags import override_codes
        own = override_codes(self.diagnosis, s, *override, self._checked())
        return sorted(own, key=lambda code: SEVERITY[code] != "stop")

    def override_of(self, s: int) -> tuple[str, dict | None] | None:
        """Where an override stands on series ``s``'s data making another model stand than the proposal: that model
        and the decision's ``signed`` snapshot (``shown_flags.override_codes``); else None."""
        name = self._standing_name(s) if self.status_code[s] == CODE["overridden"] else None
        chosen = int(self.results.chosen[s])
        if name is None or (chosen >= 0 and name == self.results.names[chosen]):
            return None
        return name, (self.standing(s) or {}).get("signed") or None

    def _checked(self) -> dict:
        """Each override's codes as checked (``shown_flags.override_codes``' memo): made once for these results."""
        memo = self.__dict__.get("_own_flags")
        if memo is None or memo[0] is not self.results:
            memo = self.__dict__["_own_flags"] = (self.results, {})
        return memo[1]

    def _listed(self) -> tuple[np.ndarray, np.ndarray]:
        """``(raised, order)``: ``listed_raised`` and ``listed_attention``, made again only where the diagnosis or an
        override changed."""
        overridden = np.flatnonzero(self.status_code == CODE["overridden"]).tolist()
        overrides = {s: found for s in overridden if (found := self.override_of(s)) is not None}
        names = tuple((s, name) for s, (name, _) in overrides.items())
        made = self.__dict__.get("_listed_made")
        if made is None or made[0] is not self.diagnosis or made[1] != names:
            from fitcore.review.shown_flags import shown_order, shown_raised
            raised = shown_raised(self.diagnosis, overrides, self._checked())
            made = self.__dict__["_listed_made"] = (self.diagnosis, names, raised,
                                                    shown_order(self.diagnosis, raised, overrides))
        return made[2], made[3]

    def listed_raised(self) -> np.ndarray:
        """(S, len(CODES)) bool: the flags the list shows of each series (``listed_flags``; ``shown_flags.
        shown_raised``, as the report counts them): the results' flags, an override's rows its own curve's — what
        the flag filter, its counts and the attention order go by, so that '⚑ rising' lists the rows that say
        rising (it picked by the proposal's flags and listed a flat override; a trial)."""
        return self._listed()[0]

    def listed_attention(self) -> np.ndarray:
        """Series indices in the list's attention order (``shown_flags.shown_order``, as the report orders): by the
        flags the rows show (``listed_raised``), then the score — an override's its own curve's Q², as its row
        shows it: an override to a clean curve no longer ranks by its proposal's stop flag or score."""
        return self._listed()[1]
