"""The evidence for one series: charts, candidates, flags, plan prediction, ledger history."""
from __future__ import annotations

import math

from rich.console import Group
from rich.table import Table
from rich.text import Text
from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.widgets import Static

from fitcore.review.sentences import fmt, money

from ..session import TriageSession
from ..text import clean, literal
from .charts import curve_chart, fold_chart

SEVERITY_STYLE = {"stop": "#ff875f", "warn": "#d7af5f"}


class EvidencePanel(VerticalScroll, can_focus=True):
    """Shows ``series`` of the session; ``show(s)`` to change it."""

    def __init__(self, session: TriageSession, **kwargs) -> None:
        super().__init__(**kwargs)
        self.session = session
        self.series: int | None = None

    def compose(self) -> ComposeResult:
        yield Static(id="ev-title", markup=False)
        yield Static(id="ev-curve", markup=False)
        yield Static(id="ev-folds", markup=False)
        yield Static(id="ev-candidates", markup=False)
        yield Static(id="ev-flags", markup=False)
        yield Static(id="ev-plan", markup=False)
        yield Static(id="ev-history", markup=False)

    def show(self, series: int | None) -> None:
        self.series = series
        self.redraw()

    def on_resize(self) -> None:
        self.redraw()

    def redraw(self) -> None:
        if not self.is_mounted:
            return
        s = self.series
        parts = {name: self.query_one(f"#ev-{name}", Static)
                 for name in ("title", "curve", "folds", "candidates", "flags", "plan", "history")}
        if s is None:
            parts["title"].update(Text("Nothing listed: change the filter (f) or the search (/).", style="dim"))
            for name, part in parts.items():
                if name != "title":
                    part.update("")
            return
        width = max(self.scrollable_content_region.width - 3, 30)
        tall = self.app.size.height >= 40
        results = self.session.results
        parts["title"].update(self.title_text(s))
        parts["curve"].update(curve_chart(results, s, width, 18 if tall else 12))
        parts["folds"].update(fold_chart(results, s, width, 12 if tall else 9))
        parts["candidates"].update(self.candidate_table(s))
        parts["flags"].update(self.flags_text(s))
        parts["plan"].update(self.plan_text(s))
        parts["history"].update(self.history_text(s))

    def title_text(self, s: int) -> Text:
        results, session = self.session.results, self.session
        text = literal(session.label(s), "bold")
        text.append(f"  {results.data.counts[s]} obs, prices {money(results.price_lo[s])}–"
                    f"{money(results.price_hi[s])}  · status {session.status[s]}", style="dim")
        return text

    def candidate_table(self, s: int) -> Group:
        """Available candidates as a table; the others below it, each with its reason."""
        results = self.session.results
        table = Table(box=None, pad_edge=False, expand=False, show_edge=False, header_style="bold")
        for name, justify in (("", "left"), ("candidate", "left"), ("CV MSE", "right"), ("± SE", "right"),
                              ("Q²", "right"), ("R²", "right")):
            table.add_column(name, justify=justify)
        missing = Text(style="dim")
        for c, cand in enumerate(results.candidates):
            if not results.available[s, c]:
                missing.append(f"  {cand.name}: {clean(results.reason_text(s, c) or '')}\n")
                continue
            table.add_row("✓" if c == results.chosen[s] else "", cand.name, fmt(results.cv_mse[s, c]),
                          fmt(results.cv_se[s, c]), f"{results.q2[s, c] * 100:.0f}%", f"{results.r2[s, c] * 100:.0f}%")
        return Group(table, missing)

    def flags_text(self, s: int) -> Text:
        flags = self.session.diagnosis.flags_of(s)
        if not flags:
            return Text("No flags.", style="dim")
        text = Text()
        for f in flags:
            text.append(f"[{f['severity']}] {f['code']}: ", style=SEVERITY_STYLE[f["severity"]])
            text.append(clean(f["message"]) + "\n")
        return text

    def plan_text(self, s: int) -> Text:
        results = self.session.results
        c = results.chosen[s]
        text = Text()
        plan = results.plan_price[s]
        if c >= 0 and math.isfinite(plan):
            text.append(f"Plan price {money(plan)}: volume {fmt(results.plan_volume[s, c])} "
                        f"(95% PI {fmt(results.plan_lo[s, c])} to {fmt(results.plan_hi[s, c])}), "
                        f"elasticity {results.plan_elasticity[s, c]:.2f}.")
            if not results.price_lo[s] <= plan <= results.price_hi[s]:
                text.append(" Outside the observed prices: an extrapolation.", style=SEVERITY_STYLE["stop"])
            text.append("\n")
        elif c >= 0:
            text.append("No plan price for this series.\n", style="dim")
        if c >= 0 and math.isfinite(results.revenue_price[s]):
            text.append(f"Revenue-maximising price within the observed range: {money(results.revenue_price[s])}.\n")
        return text

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
