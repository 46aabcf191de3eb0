"""From a decision key to the ledger on the triage screen: the dialogs a decision passes (a new set of series or
a look-alike confirmed, the reason or note asked, the override's candidate picked), the one ``decide`` that
records it and says what happened, and the refusal that says why not (keeping a typed note).

``DecisionFlow`` is a mixin of ``TriageScreen``, which gives it ``session``, ``refresh_all``, Textual's ``app``
and ``notify``, and ``_unsaid`` (series id → the note of a decision the ledger refused, offered again).
"""
from __future__ import annotations

import math
import time

from rich.text import Text

from fitcore.errors import PricefoldError
from fitcore.review.formats import fmt, money

from ..session import Shown
from ..text import clean, printable
from ..widgets.evidence import predicts
from ..widgets.status_line import ALIKE_DECIDES, alike_words, keys_lead
from .dialogs import ChoiceDialog, MessageDialog, TextDialog

REPLACING = ("accept", "override", "hold")  # the decisions that replace what stands (a note stands beside it)
TOLD = {"accept": "Accepted", "override": "Overrode", "hold": "Held", "note": "Noted", "revoke": "Revoked"}


# Beside every note that signs a curve: the observational data's caution and who decides (the help's in full:
# ``fitcore.review.plan_words.caution``).  Not "promotions and seasons": a fit may hold those fixed.
SIGNING_CAUTION = ("Observational sales data: whatever moved with price and is not held fixed in the fit is in the "
                   "curve too. pricefold proposes; you decide.")


class DecisionFlow:
    """The triage screen's decisions, each on the series ``shown`` showed when its key was pressed."""

    answers_due = 0  # dialogs closed or open whose answer the screen has not acted on yet (``open_dialog``)

    def open_dialog(self, dialog, then=None) -> None:
        """Push ``dialog``; ``then(answer)`` when it closes.  Until that has run the screen takes no key of its own
        (``TriageScreen.check_action``): Textual runs the answer after the dialog has closed, so keys typed ahead
        of the next dialog (a reason begun at once, "as good as…") would reach the list — its ``a`` would accept
        the series under the cursor, a decision nobody meant."""
        self.answers_due += 1

        def answered(answer) -> None:
            self.answers_due -= 1
            if then is not None:
                then(answer)
        self.app.push_screen(dialog, answered)

    def decide(self, shown: Shown, action: str, model: str | None = None, note: str = "") -> None:
        """Record ``action`` on the series ``shown`` showed; say what happened, and move on after a decision."""
        before = self.session.view  # (a rebuild makes a new array): the list the analyst was working down
        replaced = self.replaced_text(shown) if action in REPLACING else None  # as it stood until recorded
        try:
            self.session.decide(shown, action, model=model, note=note)
        except PricefoldError as exc:  # refused by the screen or by the ledger's rules, or not written
            self.not_recorded(shown, exc, note)
            return
        self._unsaid.pop(shown.sid, None)
        s = self.session.index_of(shown)
        what = f" {model}" if action == "override" else ""
        instead = f", in place of {replaced}" if replaced else ""
        self.notify(f"{TOLD[action]}{what}: {self.session.label(s)}{instead}", markup=False, timeout=5 if replaced else 3)
        moved = self.session.book.tail_moved_to
        if moved is not None:  # the header had said "the next decision moves it to …"; now where it went (a trial)
            self.notify(f"The interrupted tail after the ledger's last whole record was moved to {clean(moved.name)} "
                        "beside it", markup=False, timeout=10)
        if action in ("accept", "override", "hold"):
            self.session.after_decision(s, before)
            self._moved_on_at = time.monotonic()  # the next series comes up now: ``too_soon`` waits longer for it
        else:
            self.session.bring(s)
        self.refresh_all()

    def not_recorded(self, shown: Shown, exc: PricefoldError, note: str = "") -> None:
        """Say why a decision was refused (keeping a typed note for the next note box), and show the series as the
        ledger has it now."""
        kept = ""
        if note:  # typed for nothing otherwise: the next note box on this series starts with it
            self._unsaid[shown.sid] = note
            kept = ("\n\nYour note is kept: the next note box on this series starts with it."
                    if self.session.writable else  # no note box will open: the note itself, to copy
                    f"\n\nNothing can be recorded now; your note was: {clean(note)}")
        self.open_dialog(MessageDialog(Text(f"Not recorded: {printable(str(exc))}{kept}", style="bold")))
        self.refresh_all()

    def ask(self, title: str, placeholder: str, required: bool, then, about: Text | None = None) -> None:
        """A note dialog (holding the note the ledger last refused on this series); ``then(note)`` unless
        cancelled.  ``about``: what the note is about, shown above the box."""
        shown = self.session.shown
        value = self._unsaid.get(shown.sid, "") if shown is not None else ""
        self.open_dialog(TextDialog(title, placeholder, required=required, value=value, about=about),
                             lambda note: None if note is None else then(note))

    def signing_text(self, shown: Shown, model: str | None = None) -> Text:
        """What an accept (or an override to ``model``) signs, in numbers: the curve at the plan price (volume,
        interval, elasticity where it means something) — an override's own flags too —, so the note is written
        with the figure in view (a model picked by keys typed ahead of the list, unseen, is seen here); then the
        caution every sign-off carries."""
        results = self.session.results
        s = self.session.index_of(shown)
        c = int(results.chosen[s]) if model is None else results.names.index(model)
        plan, lo, hi = float(results.plan_price[s]), float(results.price_lo[s]), float(results.price_hi[s])
        unit = self.session.units.get("volume")
        if not math.isfinite(plan):
            said = f"No plan price: {results.names[c]} is signed as fitted (prices {money(lo)}–{money(hi)} observed)."
        else:
            where = "" if lo <= plan <= hi else f", outside the prices observed ({money(lo)}–{money(hi)})"
            said = (f"At the plan price {money(plan)}{where}, "
                    + predicts(results, s, c, lambda v: f"{fmt(v)} {unit}" if unit else fmt(v),
                             self.session.diagnosis) + ".")
        text = Text()
        replaced = self.replacing(shown, "accept")
        if replaced is not None:
            text.append_text(replaced).append("\n")
        text.append(said, style="#ff875f" if math.isfinite(plan) and results.plan_volume[s, c] <= 0 else "")
        if model is not None:
            from .override import candidate_rows
            flags = next(row.flags for row in candidate_rows(results, s, self.session.diagnosis) if row.name == model)
            text.append(f"\n{model}'s own flags: {' · '.join(flags)}" if flags else f"\n{model}: no shape or range flag",
                        style="#ff875f" if flags else "dim")
        text.append("\n" + SIGNING_CAUTION, style="dim italic")
        return text

    def replaced_text(self, shown: Shown) -> str | None:
        """What a decision on the series ``shown`` showed replaces, in words (who, what, when), where the analyst
        may not have it in mind: a decision made on other data than these (the series reads stale: an accept of
        poly5 asked only "despite rising?" and replaced the signed loglog unsaid), or one another analyst made (an
        accept's note box on a series bo held did not say it replaced bo's hold, and the evidence saying so was
        behind the dialog); else None."""
        from fitcore.ledger.rules import what_happened, what_stands
        session = self.session
        s = session.index_of(shown)
        standing, decision = session.standing(s), session.decision(s)
        if decision is not None and session.status[s] == "stale":
            return f"{what_happened(decision, dated=True)}, on other data than these (the series reads stale)"
        if standing is None or {r["analyst"] for r in (standing, decision) if r} <= {session.who.analyst}:
            return None
        return what_stands(standing, decision, dated=True)

    def replacing(self, shown: Shown, action: str) -> Text | None:
        """What a decision's box says of what stands (``replaced_text``) first, above the note box (an accept's and
        an override's above the numbers they sign, ``signing_text``); a note's that it leaves it as it is."""
        replaced = self.replaced_text(shown)
        if replaced is None:
            return None
        if action == "note":
            return Text(f"A note leaves what stands as it is: {replaced}.", style="bold")
        return Text(f"This replaces what stands: {replaced}.", style="bold")

    def new_key_set(self, action: str, then) -> None:
        """``then()`` — at once, or after a dialog where a decision on the series shown would start something new
        in the ledger and the analyst has not confirmed it yet: the results name none of the ledger's series (by
        other key columns, or other values of the same ones; asked once a session), or this series looks like one
        of the ledger's under another spelling (asked once a series).  The dialog says why and what a decision
        records; "No" (the default) or Esc cancels: nothing is written.  "Yes" reads the ledger again first: a decision
        it would refuse (``action`` on a series someone else decided meanwhile) is refused then, before a note box."""
        said = self.session.key_columns.unconfirmed
        shown = self.session.shown
        s = self.session.index_of(shown) if shown is not None else -1
        alikes = self.session.spellings.unconfirmed(s) if s >= 0 else frozenset()
        if said is None and not alikes:
            then()
            return
        name = self.session.key_columns.ledger_name
        columns = ", ".join(map(clean, self.session.key_columns.columns))
        parts, yes = [], []
        if said is not None:
            parts.append(f"{keys_lead(self.session.key_columns)}: {said}. A decision here starts a new set of series "
                         f"in {name} (a second data set beside its own).")
            yes.append(f"decide on series keyed by {columns} in {name}" if self.session.key_columns.mismatch
                       else f"start a new set of series in {name}")
        if alikes:
            parts.append(f"{alike_words(self.session, s)} {ALIKE_DECIDES}")
            yes.append("record it as a new series")

        def answered(choice: str | None) -> None:
            if choice == "confirm":
                if said is not None:
                    self.session.key_columns.confirmed = said  # ``decide`` refuses if the ledger moved on meanwhile
                if alikes:
                    self.session.spellings.confirm(s, alikes)
                try:  # the dialog may have stood a while: the ledger's refusal now, not after a note is typed
                    self.session.check_shown(shown, action)
                except PricefoldError as exc:
                    self.not_recorded(shown, exc)
                    return
                then()
        self.open_dialog(ChoiceDialog(" ".join(parts) + " Is that what you mean?",
                                          [("confirm", "Yes: " + "; ".join(yes)),
                                           ("cancel", "No: record nothing (Esc)")], "cancel"), answered)

    def accept(self, shown: Shown) -> None:
        if self.session.needs_reason(shown, "accept"):
            self.ask(f"Accept {shown.proposed} for {self.session.label(shown.series)} despite "
                     f"{', '.join(shown.to_explain)}? Say why", "a note is required",
                     True, lambda note: self.decide(shown, "accept", note=note), self.signing_text(shown))
        elif self.anothers(shown):  # one key must not replace a colleague's hold or decision unasked (a trial)
            def answered(choice: str | None) -> None:
                if choice == "accept":
                    try:  # the dialog may have stood a while: the ledger's refusal now
                        self.session.check_shown(shown, "accept")
                    except PricefoldError as exc:
                        self.not_recorded(shown, exc)
                        return
                    self.decide(shown, "accept")
            self.open_dialog(ChoiceDialog(f"Accept {shown.proposed} for {self.session.label(shown.series)}? This "
                                          f"replaces what stands: {self.replaced_text(shown)}.",
                                          [("accept", f"Yes: accept {shown.proposed}"),
                                           ("cancel", "No: record nothing (Esc)")], "cancel"), answered)
        else:
            self.decide(shown, "accept")

    def anothers(self, shown: Shown) -> bool:
        """Whether another analyst's decision on these data stands on the series ``shown`` (or is the latest
        there).  One made on other data (the series reads stale) is last cycle's, which a new cycle's decisions
        replace as a matter of course: its box, where one opens, says so (``replaced_text``)."""
        session = self.session
        s = session.index_of(shown)
        if session.status[s] == "stale":
            return False
        return bool({r["analyst"] for r in (session.standing(s), session.decision(s)) if r} - {session.who.analyst})

    def hold(self, shown: Shown) -> None:
        self.ask(f"Hold {self.session.label(shown.series)}: why? (optional)", "Enter alone holds without a note",
                 False, lambda note: self.decide(shown, "hold", note=note), self.replacing(shown, "hold"))

    def note(self, shown: Shown) -> None:
        self.ask(f"Note on {self.session.label(shown.series)}", "what should the next reader know?", True,
                 lambda note: self.decide(shown, "note", note=note), self.replacing(shown, "note"))

    def override(self, shown: Shown, s: int) -> None:
        """The override dialog on series ``s`` (where ``shown`` is as it opens), opening on the model
        standing where it is not the proposal; then the reason."""
        session = self.session

        def picked(model: str | None) -> None:
            if model is not None:
                self.ask(f"Why {model} instead of {shown.proposed} for {session.label(s)}?", "a note is required", True,
                         lambda note: self.decide(shown, "override", model, note), self.signing_text(shown, model))

        from .override import OverrideDialog  # with the first override, not before the list's first frame
        self.open_dialog(OverrideDialog(session.results, s, session.label(s), session.diagnosis,
                                            shown.model if shown.model != shown.proposed else None,
                                            session.accepted_other(s) is not None), picked)

    def revoke(self, s: int, record: dict) -> None:
        """Ask first, then revoke ``record``, this screen's latest decision that still stands (on series ``s``;
        the cursor goes there): the dialog says what it withdraws and what stands after it, takes an optional note,
        and Esc keeps the decision.  Before, ``u`` withdrew at once with an empty note — a ``u`` in a note typed
        after an accept that needed none withdrew that accept, unseen."""
        from ..session import describe
        self.session.bring(s)
        self.refresh_all()
        shown = self.session.look(s)
        what = f"{record['action']} {record.get('model') or ''}".strip()
        history = self.session.histories.get(shown.sid)
        before = history.standing[-2] if history is not None and len(history.standing) > 1 else None
        after = f"{describe(before)} stands again" if before is not None else "the series is pending again"
        if before is not None and before.get("fingerprint") != shown.fingerprint:  # last cycle's, say (a trial)
            # and not carried (``due.revoked_due``): what a revoke leaves standing waits for a person
            after += (", made on other data than these: the series reads stale, and ledger carry will not carry it "
                      "until someone decides the series")
        about = Text(f"Withdraws {describe(record)}; {after}. The ledger keeps both, and the revoke with its note.")
        self.ask(f"Revoke your {what} on {self.session.label(s)}? Why (optional)",
                 "why? (optional) · Esc keeps the decision", False,
                 lambda note: self.revoked(shown, s, what, note), about)

    def revoked(self, shown: Shown, s: int, what: str, note: str) -> None:
        try:
            self.session.decide(shown, "revoke", note=note)
        except PricefoldError as exc:  # replaced by someone else meanwhile, say: the note kept, as for a decision
            self.not_recorded(shown, exc, note)
            return
        self.notify(f"Revoked your {what} on {self.session.label(s)}", markup=False, timeout=5)
        self.session.bring(s)
        self.refresh_all()
