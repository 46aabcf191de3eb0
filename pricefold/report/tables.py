"""The report's tables: who decided how many and when, bulk decisions, and the decisions table.

The decisions table is plain HTML that reads without any script; the page's small script adds
sorting (a button in each heading) and a filter box.  Cells that sort by number carry the raw
value in ``data-sort``; on a phone each row becomes a card labelled from ``data-label``.
"""
from __future__ import annotations

import math

from fitcore.ledger.signoff import STATUSES, Signoff
from fitcore.review.flags import CODES, SEVERITY

from .page import Report, cell, elasticity, esc, interval, num, price, when

ACTIONS = ("accept", "override", "hold", "note", "revoke", "carry")
COLUMNS = (("Series", ""), ("Status", ""), ("Model", ""), ("Plan price", "num"), ("Volume (95% PI)", "num"),
           ("Elasticity", "num"), ("Flags", ""), ("Analyst", ""), ("Time (UTC)", ""), ("Note", ""))


def label(results, s: int) -> str:
    """Series ``s``'s key as one line (product first), as the data hold it."""
    return " · ".join(str(v) for v in results.data.key_of(int(s)).values())


def analysts(signoff: Signoff) -> str:
    if not signoff.analysts:
        return "<p>Nobody has recorded a decision yet.</p>"
    shown = [a for a in ACTIONS if any(t.actions.get(a) for t in signoff.analysts)]
    head = "".join(f"<th class=\"num\">{a}</th>" for a in shown)
    rows = "".join("<tr>" + cell("Analyst", esc(t.analyst)) + "".join(cell(a, num(t.actions.get(a, 0)), "num")
                                                                    for a in shown)
                   + cell("First", when(t.first)) + cell("Last", when(t.last)) + "</tr>" for t in signoff.analysts)
    return (f"<div class=\"wide\"><table class=\"cards-small\"><thead><tr><th>analyst</th>{head}<th>first</th>"
            f"<th>last</th></tr></thead><tbody>{rows}</tbody></table></div>")


def bulk(signoff: Signoff, ledger_path: str, results_path: str) -> str:
    if not signoff.bulk:
        return "<p>No bulk decisions.</p>"
    rows = "".join("<tr>" + cell("Analyst", esc(g.analyst)) + cell("Command", esc(g.action))
                   + cell("Series", num(g.count), "num") + cell("When", when(g.first))
                   + cell("Note", esc(g.note), "note") + "</tr>" for g in signoff.bulk)
    return (f"<div class=\"wide\"><table class=\"cards-small\"><thead><tr><th>analyst</th><th>command</th>"
            f"<th class=\"num\">series</th><th>when</th><th>note</th></tr></thead><tbody>{rows}</tbody></table></div>"
            f"<p class=\"muted\">Series decided in bulk appear in the decisions table only when they carry a stop "
            f"flag. The full list: <code>pricefold ledger export {esc(ledger_path)} --results {esc(results_path)} "
            f"-o decisions.csv</code>.</p>")


def _flag_cell(signoff: Signoff, s: int) -> str:
    raised = signoff.diagnosis.raised[s]
    codes = [code for i, code in enumerate(CODES) if raised[i]]
    codes.sort(key=lambda code: SEVERITY[code] != "stop")
    return " ".join(f"<span class=\"flag sev-{SEVERITY[c]}\">{c}</span>" for c in codes)


def _sort_value(x) -> str:
    return "" if x is None or not math.isfinite(float(x)) else repr(float(x))


def row(signoff: Signoff, s: int, detailed: set) -> str:
    results = signoff.results
    status = STATUSES[signoff.status[s]]
    c = signoff.model_index(s)
    proposal = int(results.chosen[s])
    model = esc(results.names[c]) if c >= 0 else "none"
    if c >= 0 and proposal >= 0 and c != proposal:
        model += f" <span class=\"muted\">(proposal {esc(results.names[proposal])})</span>"
    plan = float(results.plan_price[s])
    planned = c >= 0 and math.isfinite(plan)
    volume = float(results.plan_volume[s, c]) if planned else None
    lo, hi = (float(results.plan_lo[s, c]), float(results.plan_hi[s, c])) if planned else (None, None)
    shown = (f"{num(volume)} <span class=\"muted\">({interval(lo, hi)})</span>"
                if planned and lo is not None and math.isfinite(lo) else num(volume) if planned else "—")
    e = float(results.plan_elasticity[s, c]) if planned else None
    current = signoff.standing(s) or {}
    history = signoff.history(s)
    latest = current or (history[-1] if history else {})
    name = esc(label(results, s))
    key = f"<a href=\"#s{s}\">{name}</a>" if s in detailed else name
    carried = " (carried)" if signoff.carried[s] else ""
    time = when(latest["at"], zone=False) if latest.get("at") else ""
    return (f"<tr data-status=\"{status}\">" + cell("Series", key, "key")
            + cell("Status", status + carried, f"st-{status}") + cell("Model", model)
            + cell("Plan price", price(plan) if math.isfinite(plan) else "—", "num", _sort_value(plan))
            + cell("Volume (95% PI)", shown, "num", _sort_value(volume))
            + cell("Elasticity", elasticity(e, volume) if planned else "—", "num",
                   _sort_value(e if planned and volume > 0 else None))
            + cell("Flags", _flag_cell(signoff, s)) + cell("Analyst", esc(latest.get("analyst", "")))
            + cell("Time", time, "time", esc(latest.get("at", ""))) + cell("Note", esc(signoff.last_note(s)), "note")
            + "</tr>")


def decisions(report: Report, detailed: set) -> str:
    signoff = report.signoff
    rows = signoff.table_rows()
    counts = signoff.counts()
    options = "".join(f"<option value=\"{s}\">{s}</option>" for s in STATUSES if counts[s])
    head = "".join(f"<th class=\"{cls}\">{name}</th>" if cls else f"<th>{name}</th>" for name, cls in COLUMNS)
    body = "".join(row(signoff, int(s), detailed) for s in rows)
    lead = (f"<p>{num(len(rows))} series: every series a person decided one by one, and every series with a "
            f"stop flag, most in need of attention first. Volumes are at the plan price under the model that "
            f"stands (the proposal while pending), with its 95% prediction interval.</p>")
    controls = ("<div class=\"controls\" id=\"decisions-controls\" hidden><label>Find <input type=\"search\" "
                "placeholder=\"series, analyst, note…\"></label><label>Status <select><option value=\"\">all"
                f"</option>{options}</select></label><output></output></div>")
    table = (f"<div class=\"wide\"><table id=\"decisions-table\" class=\"cards-small\"><thead><tr>{head}</tr></thead>"
             f"<tbody>{body}</tbody></table></div>" if len(rows) else "<p>No series to list.</p>")
    return f"<section id=\"decisions\"><h2>Decisions</h2>{lead}{controls}{table}</section>"


def people(report: Report) -> str:
    signoff = report.signoff
    return (f"<section id=\"people\"><h2>Who decided</h2>{analysts(signoff)}<h3>Bulk decisions</h3>"
            f"{bulk(signoff, report.ledger.path, report.results_path)}</section>")
