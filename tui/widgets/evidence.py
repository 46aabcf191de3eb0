"""The evidence for one series: what stands and why, flags, plan, charts, candidates, ledger history.

The words come first (they fit a small terminal), the charts after them.  Every number is of the
model that now stands: the engine's proposal, an analyst's override, or an accept of another fit's
proposal on the same data.  The title (which series, its status) is drawn as soon as the cursor lands; the
rest once it rests, dimmed until then (and, for results read from a file, once their candidates' numbers
are read, just after the list's).
"""
from __future__ import annotations

import math

from rich.cells import cell_len
from rich.console import Group
from rich.table import Table
from rich.text import Text
from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.widgets import Static

from fitcore.data.keys import SEPARATOR
from fitcore.ledger.rules import NEWER_DUE, what_stands
from fitcore.review.choice import plan_position, score_meaning, why_chosen
from fitcore.review.control_words import effect_words
from fitcore.review.flags import SEVERITY
from fitcore.review.formats import fmt, money
from fitcore.review.plan_words import (elasticity_of, elasticity_words, held_words, revenue_words, weight_column,
                                       weighed_zero, weighting_words)
from fitcore.text import told_apart

from .. import engine
from ..cells import cut, key_labels, percent, wrapped
from ..session import TriageSession, describe
from ..text import clean, printable
from .charts import curve_chart, fold_chart
from .status_line import ALIKE_DECIDES, alike_words

SEVERITY_STYLE = {"stop": "#ff875f", "warn": "#d7af5f"}
NEWS_STYLE = "#5fafff"
PARTS = ("title", "flags", "since", "why", "plan", "curve", "folds", "candidates", "history")
NEAR_ROWS = 64  # rows either side of the cursor the title reads differently from: more than a screen shows
CHART_DELAY = 0.12  # draw all but the title once the cursor rests, not on every key of a fast scroll


def gauge(plan: float, lo: float, hi: float, width: int = 24) -> str:
    """'1.61 ├─────●──────┤ 2.73': the plan price among the observed prices (● outside the bar when beyond)."""
    if not (math.isfinite(plan) and hi > lo):
        return ""
    bar = ["─"] * width
    share = (plan - lo) / (hi - lo)
    if 0 <= share <= 1:
        bar[min(int(share * width), width - 1)] = "●"
        return f"{money(lo)} ├{''.join(bar)}┤ {money(hi)}"
    return (f"● {money(lo)} ├{''.join(bar)}┤ {money(hi)}" if share < 0
            else f"{money(lo)} ├{''.join(bar)}┤ {money(hi)} ●")


OBSERVATIONAL = "Observational data: whatever else moved with price is in this curve too."  # one line at 80×24


def predicts(results, s: int, c: int, volume_text=fmt, diagnosis=None) -> str:
    """'poly1 predicts volume -268.9 (95% PI -294.0 to -243.8), no elasticity (…)': candidate ``c`` at the
    plan price, as the evidence says it and as an accept past a stop flag shows what is signed; the elasticity
    as it can be read (``fitcore.review.plan_words``; ``diagnosis``: the flags, for a price tied to a control)."""
    volume = float(results.plan_volume[s, c])
    slope = elasticity_of(results, diagnosis, s, c) if diagnosis is not None else \
        elasticity_words(float(results.plan_elasticity[s, c]), volume, bool(results.price_hi[s] > results.price_lo[s]))
    return (f"{results.names[c]} predicts volume {volume_text(volume)} ({results.settings.level:.0%} PI "
            f"{fmt(results.plan_lo[s, c])} to {fmt(results.plan_hi[s, c])}), {slope}")


def near_tie_rival(session: TriageSession, s: int) -> int:
    """The candidate the near-tie flag names when that flag is raised on ``s``, else -1: the diagnosis's own
    number, or (flags as a results file stored them, sentences only) the candidate its sentence opens with."""
    diagnosis, names = session.diagnosis, list(session.results.names)
    if "near-tie" not in session.flag_codes(s):
        return -1
    if "rival" in diagnosis.numbers:
        return int(diagnosis.numbers["rival"][s])
    said = next((f["message"] for f in diagnosis.flags_of(s) if f["code"] == "near-tie"), "")
    first = said.split(" ", 1)[0]
    return names.index(first) if first in names else -1


class EvidencePanel(VerticalScroll, can_focus=True):
    """Shows ``series`` of the session; ``show(s)`` to change it."""

    def __init__(self, session: TriageSession, **kwargs) -> None:
        super().__init__(**kwargs)
        self.session = session
        self.series: int | None = None
        self.adjusted = False  # with controls: observations moved to the plan's control values (key c)
        self._charts_timer = None
        self._drawn: tuple | None = None  # ``drawn_state`` of the last full redraw

    def compose(self) -> ComposeResult:
        for name in PARTS:
            yield Static(id=f"ev-{name}", markup=False)

    def show(self, series: int | None, now: bool = False) -> None:
        """Show ``series``: each new series from the top, its title at once, the rest once the cursor rests
        (redrawing the whole panel on every key of a fast scroll would slow the list down)."""
        moved = series != self.series
        if moved:
            self.scroll_home(animate=False, immediate=True)
        self.series = series
        if self._charts_timer is not None:
            self._charts_timer.stop()
        if now or not moved:
            if not now and self._drawn == self.drawn_state(series) and not self.has_class("catching-up"):
                return  # a reload that changed nothing shown here (the ledger poll, a decision on another series)
            self.redraw()
            return
        # The title has a fixed height: updating it needs no layout pass (one costs ~10× a repaint here).
        self._part("title").update(self.title_text(series) if series is not None else "", layout=False)
        self.set_class(True, "catching-up")
        self._charts_timer = self.set_timer(CHART_DELAY, self.redraw)

    def on_resize(self) -> None:
        self.redraw()

    def drawn_state(self, s: int | None) -> tuple:
        """What the panel shows of series ``s`` depends on beyond the series itself."""
        session = self.session
        if s is None:
            return (None,)
        records = session.history(s)
        news = session.news.get("digest") if session.news is not None else None
        return (s, session.results, session.observed(s)[0], session.results.complete, engine.loaded(),
                session.unobserved, session.status[s],
                records[-1].get("digest") if records else None, news, session.waiting, session.model_of(s),
                session.spellings.like(s), session.spellings.alike(s))

    def redraw(self) -> None:
        if not self.session.results.numbers_ready:  # read just after the list's: the title until they are in
            self._drawn = None  # the app redraws when they are (``EvidenceReady``)
            if self.is_mounted and self.series is not None:
                self._part("title").update(self.title_text(self.series), layout=False)
            self.set_class(True, "catching-up")
            return
        self._drawn = self.drawn_state(self.series)
        self.set_class(False, "catching-up")
        self.redraw_text()
        self.redraw_charts()

    def _part(self, name: str) -> Static:
        return self.query_one(f"#ev-{name}", Static)

    def redraw_text(self) -> None:
        if not self.is_mounted:
            return
        s = self.series
        if s is None:
            said = self.session.empty_words()  # as the list says it: the title, then the rest below it
            self._part("title").update(Text(said[0], style="dim"))
            self._part("flags").update(Text(" ".join(said[1:]), style="dim"))
            for name in PARTS[2:]:
                self._part(name).update("")
            return
        self._part("title").update(self.title_text(s), layout=False)
        for name, text in (("flags", self.alike_text(s) + self.flags_text(s)), ("since", self.since_text(s)),
                           ("why", self.why_text(s)),
                           ("plan", self.plan_text(s)), ("history", self.history_text(s))):
            text.rstrip()
            self._part(name).update(text)
        self._part("candidates").update(self.candidate_table(s))

    def redraw_charts(self) -> None:
        if not self.is_mounted or self.series is None:
            return
        s = self.series
        width = max(self.scrollable_content_region.width - 3, 30)
        tall = self.app.size.height >= 40
        observed, at = self.session.observed(s)  # the series fitted first, before the whole data, if it is one
        unobserved = None if observed.rows_loaded else self.session.unobserved
        if not (observed.rows_loaded or self.session.results.complete):  # a fit brings its numbers; a file's wait
            reading = Text("charts: reading " + ("the rest of the results file …" if unobserved else
                                                 "the data and the rest of the results file …"), style="dim")
            self._part("folds").update(reading)
            self._part("curve").update(reading + Text(f"\n{unobserved}", style=SEVERITY_STYLE["warn"]) if unobserved
                                       else reading)
            return
        if observed.rows_loaded or engine.loaded():
            self._part("curve").update(drawn(lambda: curve_chart(
                observed, at, width, 18 if tall else 12, self.session.model_of(s), self.session.units, self.adjusted,
                self.signed_shown(s), unobserved, near_tie_rival(self.session, s),
                "accepted" if self.session.accepted_other(s) else "override")))
        else:  # the first call of a compiled loop would hold the whole screen back: it is loading behind it
            waiting = unobserved or "observations and band: reading the data …"
            self._part("curve").update(Text(f"curves: starting the engine …; {waiting}", style="dim"))
        self._part("folds").update(drawn(lambda: fold_chart(observed, at, width, 12 if tall else 9)))

    # -- the parts ----------------------------------------------------------------------------
    def title_text(self, s: int) -> Text:
        """Three lines at most, each cut to the width: which series, its status, news from another analyst."""
        results, session = self.session.results, self.session
        width = max(self.scrollable_content_region.width, 20)
        zero = weighed_zero(None if results.weight_0 is None else results.weight_0[s])
        about = (f"  {results.data.counts[s]} obs{zero}, prices {self.price(results.price_lo[s])}–"
                 f"{self.price(results.price_hi[s])}")
        # a long product name gives way to its segments and to what is said about the series (a key of one
        # part keeps the width: the name is all that tells the series apart)
        near = self.near_parts(s)
        label = cell_len(SEPARATOR.join(told_apart(near)[0]))  # as shown: 'cafe⟨U+0301⟩' beside 'café'
        room = min(label, max(width - cell_len(about), width * 2 // 3) if len(near[0]) > 1 else width)
        # a name that fits whole but not beside the counts keeps the line; the counts follow the status
        # (at 52 cells, "… · South  104 obs, prices 0.60–0.…" lost the highest price)
        after = label + cell_len(about) > width >= label
        head = Text(key_labels(near, label if after else room)[0], style="bold")
        if not after:
            head.append(cut(about, max(width - cell_len(head.plain), 0)), style="dim")
        standing = session.standing(s)
        due = session.due(s)
        who = what_stands(standing, session.decision(s)) if standing else ""
        said = f"status {session.status[s]}" + (f" — due: {due}" if due else "") + (
            (f"; {who}" if due else f": {who}") if standing else "")
        news = session.news is not None and s == session.current
        if after:
            said += " · " + about.strip()
        # the third line is the news's, or the status's own where it is longer than the width (a cut hid the time)
        status = Text("\n".join(wrapped(said, width, 1 if news else 2)))
        if after:
            status.highlight_words([about.strip()], style="dim")
        lines = [head, status]
        if news:
            said = "↑ just now: it has left your list; decision keys wait until you move" if session.waiting \
                else f"↑ just now: {describe(session.news, when=False)}"
            lines.append(Text(cut(said, width), style=NEWS_STYLE))
        return Text("\n").join(lines)

    def near_parts(self, s: int) -> list[tuple[str, ...]]:
        """The key parts of series ``s`` and of every series listed near the cursor (all the list can show at
        once), ``s``'s first: the title reads differently from each (``key_labels``)."""
        session = self.session
        near = session.view[max(session.cursor - NEAR_ROWS, 0):session.cursor + NEAR_ROWS].tolist()
        return [session.label_parts(t) for t in [s, *(t for t in near if t != s)]]

    def alike_text(self, s: int) -> Text:
        """Where series ``s`` looks like a ledger series under another spelling: which, and what a decision does."""
        if self.session.spellings.like(s) is None:
            return Text()
        text = Text("≈ Spelled otherwise: ", style=f"bold {SEVERITY_STYLE['warn']}")
        text.append(f"{printable(alike_words(self.session, s))} {ALIKE_DECIDES} It asks first.\n\n")
        return text

    def flags_text(self, s: int) -> Text:
        """The flags with their sentences; where an override stands, its own curve's codes first (as its row in the
        list shows them), the sentences then said to be the proposal's (they read as the standing curve's: an
        override to a flat curve showed the proposal's '! rising' under the list's row of no flag; a trial)."""
        flags = sorted(self.session.diagnosis.flags_of(s), key=lambda f: SEVERITY[f["code"]] != "stop")
        override = self.session.override_of(s)
        if override is None:
            text = Text("No flags." if not flags else "", style="dim" if not flags else "")
        else:
            own = self.session.listed_flags(s)
            text = Text(f"{clean(override[0])}, which stands: ", style="bold")
            text.append(" · ".join(own) if own else "no flag",
                        style=SEVERITY_STYLE[SEVERITY[own[0]]] if own else "dim")
            proposal = self.session.results.names[int(self.session.results.chosen[s])]
            text.append(f". The flags below are the proposal's, {proposal}'s:\n" if flags else ".\n")
        for f in flags:
            text.append(f"{'!' if f['severity'] == 'stop' else '?'} [{f['severity']}] {f['code']}: ",
                        style=SEVERITY_STYLE[f["severity"]])
            message = f["message"]
            if f["code"] == "stale" and self.session.decided_on_newer(s):  # what is due, as the status line says
                message = NEWER_DUE[0].upper() + NEWER_DUE[1:] + "."
            elif f["code"] == "shifted" and self.session.decided_on_newer(s):  # not this cycle's proposal
                message = self.shift_words(s) or message
            text.append(printable(message) + "\n")
        return text

    def signed_shown(self, s: int) -> dict | None:
        """The signed model to draw beside this cycle's: that of a decision standing on other data."""
        standing = self.session.standing(s)
        drawn = self.session.status[s] == "stale" or self.session.standing_absent(s) is not None  # not among these
        return standing.get("signed") if standing is not None and drawn else None

    def since_text(self, s: int) -> Text:
        """Since sign-off: the signed curve on the rows since and this cycle's proposal beside it, in numbers."""
        said = self.shift_words(s) if self.session.status[s] == "stale" else None
        if said is None or "shifted" in self.session.flag_codes(s):  # the flag's sentence says it already
            return Text()
        text = Text("Since sign-off: ", style="bold")
        text.append(printable(said) + "\n")
        return text

    def shift_words(self, s: int) -> str | None:
        """The backtest's sentence (``shift_sentence``) for series ``s``, its proposal called what it is: on
        results older than the standing decision's data, not this cycle's (None: nothing backtested)."""
        from fitcore.review.sentences import shift_sentence
        record = self.session.backtest_of(s)
        if record is None:
            return None
        chosen = int(self.session.results.chosen[s])
        return shift_sentence(record, self.session.results.names[chosen] if chosen >= 0 else None,
                              older=self.session.decided_on_newer(s))

    def why_text(self, s: int) -> Text:
        results, session = self.session.results, self.session
        chosen, model = int(results.chosen[s]), session.model_of(s)
        scored = [(results.names[c], float(results.cv_mse[s, c]), float(results.cv_se[s, c]))
                  for c in range(len(results.names)) if results.available[s, c]]
        name = results.names[chosen] if chosen >= 0 else None
        rule = results.settings.rule
        text = Text(f"Proposed {name or 'nothing'} ({rule}): {why_chosen(scored, name, rule)}.\n")
        if chosen >= 0:
            text.append(score_meaning(float(results.q2[s, chosen]), session.diagnosis.thresholds.weak_score) + ".\n")
        absent = session.standing_absent(s)
        if absent is not None:  # the model signed is not among these results' candidates: nothing of it to show
            standing = session.decision(s)
            done = {"accept": "Accepted", "override": "Overridden to"}.get(standing["action"], "Signed")
            text.append(f"{done} {clean(absent)}", style="bold")
            text.append(f" ({describe(standing)}), which these results did not fit: its numbers are not here "
                        f"(ledger export gives them as signed; ++ on the chart). The numbers below are "
                        f"{name or 'nothing'}'s, these results' proposal; look again.\n", style=SEVERITY_STYLE["warn"])
        if model != chosen and model >= 0:
            standing = session.decision(s)  # a decision carried forward: its own analyst and note
            other = session.accepted_other(s)
            if other is not None:  # accepted as another fit's proposal on these same data
                text.append(f"Accepted {results.names[model]}", style="bold")
                text.append(f" ({describe(standing)}), the proposal of another fit of these data: these results "
                            f"propose {other}. The numbers below are {results.names[model]}'s; look again if that "
                            "changes the decision.")
                text.append(f" {clean(standing['note'])}\n" if standing.get("note") else "\n")
            else:
                text.append(f"Overridden to {results.names[model]}", style="bold")
                text.append(f" ({describe(standing)}): {clean(standing.get('note') or '')}\n")
            text.append(score_meaning(float(results.q2[s, model]), session.diagnosis.thresholds.weak_score) + ".\n")
            if other is not None:  # an override's own flags open the flags above (``flags_text``)
                diagnosis = session.diagnosis
                from fitcore.review.candidate_checks import candidate_checks  # its curves: with the first such
                checks = candidate_checks(results, s, model, diagnosis.thresholds, diagnosis.controls_outside(s)).codes
                said = ", ".join(checks) if checks else "none raised"
                text.append(f"Checks on {results.names[model]}: {said}.\n",
                            style=SEVERITY_STYLE["stop"] if checks else "")
        return text

    def plan_text(self, s: int) -> Text:
        results = self.session.results
        c = self.session.model_of(s)
        text = Text()
        plan = float(results.plan_price[s])
        lo, hi = float(results.price_lo[s]), float(results.price_hi[s])
        if c >= 0 and math.isfinite(plan):
            text.append(f"Plan price {self.price(plan)}, {plan_position(plan, lo, hi)}.\n")
            text.append(f"  {gauge(plan, lo, hi)}\n", style="dim")
            diagnosis = self.session.diagnosis
            text.append(predicts(results, s, c, self.volume, diagnosis) + ".")
            if not lo <= plan <= hi:
                text.append(" An extrapolation.", style=SEVERITY_STYLE["stop"])
            elif diagnosis.controls_outside(s):  # the flag's sentence says which, and whether its effect is missing
                text.append(" A control's plan value lies outside what this series has seen (outside-range).",
                            style=SEVERITY_STYLE["stop"])
            text.append("\n")
            text.append(f"  {OBSERVATIONAL}\n", style="dim")  # where the number a plan takes is read
        elif c >= 0:
            text.append("No plan price for this series.\n", style="dim")
        if c >= 0 and (weight_column(results) or results.controls is not None):  # unweighted, none: said in ?
            text.append(self.settings_text(s), style="dim")
        if c >= 0 and math.isfinite(results.revenue_price[s]):
            words = revenue_words(self.price(results.revenue_price[s]),
                                  bool(self.session.diagnosis.flagged("influential-point")[s]))
            text.append(f"{words[:1].upper()}{words[1:]} (proposed curve).\n")
        return text

    def settings_text(self, s: int) -> str:
        """How the numbers above were made: the weighting, and the values the controls are held at."""
        results = self.session.results
        weighting = weighting_words(weight_column(results))
        said = f"  {weighting[:1].upper()}{weighting[1:]}"
        ctl = results.controls
        if ctl is not None and len(ctl.names):
            values = {name: float(ctl.plan[s, j]) for j, name in enumerate(ctl.names)}
            said += f"; controls held at the plan's values: {held_words(values)}"
        return said + ".\n"

    def candidate_table(self, s: int) -> Group:
        """Available candidates as a table; the others below it, each with its reason."""
        results = self.session.results
        model = self.session.model_of(s)
        accepted = self.session.accepted_other(s) is not None
        table = Table(box=None, pad_edge=False, expand=False, show_edge=False, header_style="bold")
        controls = results.controls
        for name, justify in (("", "left"), ("candidate", "left"), ("CV MSE", "right"), ("± SE", "right"),
                              ("Q²", "right"), ("R²", "right"),
                              *([("controls, with the fitted curve", "left")] if controls else [])):
            table.add_column(name, justify=justify)
        # each reason wraps under itself, not under its candidate's name (a column of its own)
        missing = Table.grid(padding=(0, 1))
        missing.add_column(style="dim", no_wrap=True)
        missing.add_column(style="dim")
        for c, cand in enumerate(results.candidates):
            if not results.available[s, c]:
                why = clean(results.reason_text(s, c) or '') if results.complete else "(reading the reason …)"
                missing.add_row(Text(f"  {cand.name}:"), Text(why))
                continue
            mark = "✓" if c == results.chosen[s] else ""
            mark += ("•" if accepted else "↺") if c == model and c != results.chosen[s] else ""
            table.add_row(mark, cand.name, fmt(results.cv_mse[s, c]), fmt(results.cv_se[s, c]),
                          percent(results.q2[s, c]), percent(results.r2[s, c]),
                          *([self.control_effects(s, c)] if controls else []))
        legend = "Candidates (✓ proposed, • accepted)" if accepted else "Candidates (✓ proposed, ↺ override)"
        return Group(Text(legend, style="bold"), table,
                     *([missing] if missing.row_count else []), Text(""))

    def control_effects(self, s: int, c: int) -> Text:
        """Candidate ``c``'s control terms in words ("promo: ×1.8 fitted volume", "+120 fitted units")."""
        ctl = self.session.results.controls
        kept = {name: (float(ctl.coef[s, c, j]) if ctl.left_out[s, j] == 0 else None)
                for j, name in enumerate(ctl.names)}
        binary = {name for name, b in zip(ctl.names, ctl.binary) if b}
        return Text("; ".join(effect_words(kept, binary, self.session.results.family_of(c).smeared)))

    def history_text(self, s: int) -> Text:
        records = self.session.history(s)
        if not records:
            return Text("Ledger: no decisions yet.", style="dim")
        text = Text("Ledger:\n", style="bold")
        for r in records[-8:]:
            text.append(f"  #{r['seq']} {r['at'][:16].replace('T', ' ')} ", style="dim")
            text.append(clean(r["analyst"]))
            text.append(f" {r['action']} {r.get('model') or ''}")
            if r.get("note"):
                text.append(" — " + clean(r["note"]), style="italic")
            text.append("\n")
        return text

    # -- units --------------------------------------------------------------------------------
    def price(self, value: float) -> str:
        unit = self.session.units.get("price")
        return f"{money(value)} {unit}" if unit else money(value)

    def volume(self, value: float) -> str:
        unit = self.session.units.get("volume")
        return f"{fmt(value)} {unit}" if unit else fmt(value)


def drawn(chart) -> Text:
    """``chart()``, or a line saying it could not be drawn: a chart is evidence beside the numbers, and a fault in
    drawing one (plotext took log10 of an exact 0 once) must not end an analyst's session."""
    try:
        return chart()
    except Exception as exc:  # noqa: BLE001 - any drawing fault, said where the chart would be
        return Text(f"chart could not be drawn ({type(exc).__name__}: {printable(str(exc))}); the numbers in the "
                    "text stand", style=SEVERITY_STYLE["warn"])
