"""The report's tables: who decided how many and when, bulk decisions, and the decisions table.

The decisions table is plain HTML that reads without any script; the page's small script adds
sorting (a button in each heading) and a filter box.  Cells that sort by number carry the raw
value in ``data-sort``; on a phone each row becomes a card labelled from ``data-label``.
"""
from __future__ import annotations

import html
import math
from functools import lru_cache
from typing import NamedTuple

from fitcore.ledger.signoff import STATUSES, Signoff
from fitcore.review.candidate_checks import OF_THE_SERIES
from fitcore.review.flags import SEVERITY
from fitcore.text import clean, reveal_unnormalised

from .page import Report, alike, cell, elasticity, esc, interval, num, price, when

ACTIONS = ("accept", "override", "hold", "note", "revoke", "carry")
COLUMNS = (("Series", ""), ("Status", ""), ("Model", ""), ("Plan price", "num"), ("Volume (95% PI)", "num"),
           ("Elasticity", "num"), ("Flags", ""), ("Analyst", ""), ("Time (UTC)", ""), ("Note", ""))


def label(results, s: int, tell_apart=None) -> str:
    """Series ``s``'s key as one line (product first), made safe for the page (``esc``); a key not in NFC
    form beside another that reads the same (``fitcore.data.keys.SeriesKeys.nfc_twins``) shows what NFC
    changes by code point, as ``pricefold show`` does; ``tell_apart``: a key told apart from the signed series
    the summary names missing (``fitcore.text.told_apart_from``)."""
    parts = tuple(clean(str(v)) for v in results.data.key_of(int(s)).values())
    if _nfc_twins(results)[int(s)]:
        parts = tuple(reveal_unnormalised(part) for part in parts)
    if tell_apart is not None:
        parts = tell_apart(parts)
    return html.escape(" · ".join(parts), quote=True)


@lru_cache(maxsize=2)
def _nfc_twins(results):
    from fitcore.data.keys import SeriesKeys
    return SeriesKeys.of(results.data).nfc_twins()


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


def _flag_cell(signoff: Signoff, s: int, revoked: str | None = None) -> str:
    """The row's flags, stop flags first, each with its sentence as its title; ``revoked``: what a stale series
    whose decision a revoke left is due (``Report.revoked``), said beside ``stale`` in place of its gloss."""
    codes = signoff.codes(s)  # an override's: its own curve's
    said = {f["code"]: f["message"] for f in signoff.diagnosis.flags_of(s)} if signoff.diagnosis.raised[s].any() else {}
    gloss = GLOSS if revoked is None else {**GLOSS, "stale": f"{GLOSS['stale']}; due: {esc(revoked)}"}
    if s in signoff.overrides:  # its curve's checks have no sentence of the proposal's
        model = signoff.overrides[s][0]
        said = {code: said[code] if code in OF_THE_SERIES else f"of {model}'s own curve" for code in codes}
    codes.sort(key=lambda code: SEVERITY[code] != "stop")
    return " ".join(f"<span class=\"flag sev-{SEVERITY[c]}\" title=\"{esc(said.get(c, ''))}\">{c}</span>"
                    + (f" <span class=\"muted\">({gloss[c]})</span>" if c in gloss else "") for c in codes)


# What a stop flag cautions, beside its code where a reader of the table would otherwise see a code alone (the
# sentence is the code's title)
GLOSS = {"few-points": "too few observations", "no-model": "no curve proposed",
         "flat-price": "price barely moved: little said of price response",
         "rising": "fitted volume rises with price", "below-zero": "negative fitted volume",
         "outside-range": "an extrapolation, or a control's effect not in the number",
         "stale": "data changed since sign-off"}


def _sort_value(x) -> str:
    return "" if x is None or not math.isfinite(float(x)) else repr(float(x))


class AtPlan(NamedTuple):
    """The numbers a series' row and section show at the plan price: ``model`` the candidate they are of (-1:
    none), ``signed`` true when they are the signed snapshot's (a stale series), ``proposal`` true when they are
    the proposal's standing in for no signed curve (pending or held)."""

    model: int
    price: float
    volume: float | None
    lo: float | None
    hi: float | None
    elasticity: float | None
    signed: bool = False
    proposal: bool = False


def at_plan(signoff: Signoff, s: int) -> AtPlan:
    """What stands at the plan price: a stale series' signed curve as signed (its snapshot, as ``ledger export``
    writes it), else the standing model's numbers in these results, else (pending or held) the proposal's."""
    from ..ledger_export import signed_columns
    results = signoff.results
    current = signoff.standing(s) or {}
    c, proposal = signoff.model_index(s), int(results.chosen[s])
    if STATUSES[signoff.status[s]] == "stale" and c >= 0:  # signed on other data: never this fit's numbers
        plan = signed_columns(current)[2]
        value = lambda name: None if plan.get(name) is None else float(plan[name])  # noqa: E731
        return AtPlan(c, value("price") if plan.get("price") is not None else math.nan, value("volume"),
                      value("lo"), value("hi"), value("elasticity"), signed=True)
    shown = c if c >= 0 else proposal
    price_ = float(results.plan_price[s])
    if shown < 0 or not math.isfinite(price_):
        return AtPlan(shown, price_, None, None, None, None, proposal=c < 0)
    return AtPlan(shown, price_, float(results.plan_volume[s, shown]), float(results.plan_lo[s, shown]),
                  float(results.plan_hi[s, shown]), float(results.plan_elasticity[s, shown]),
                  proposal=c < 0 or (not current and shown == proposal))


def plan_price_text(plan: float, now: float, signed: bool) -> str:
    """The price a row's volume is at; a stale row's signed one told from this plan's where they differ ("2.20
    signed; this plan 3.30"): a trial read last cycle's price and volume as this plan's."""
    if not math.isfinite(plan):
        return "—"
    if signed and math.isfinite(now) and not math.isclose(now, plan, rel_tol=1e-12, abs_tol=0.0):
        return f"{price(plan)} <span class=\"muted\">signed; this plan {price(now)}</span>"
    return price(plan)


def by_whom(record: dict) -> str:
    """'ana, 2026-12-03 18:57': who recorded ``record`` and when (UTC)."""
    return f"{esc(record.get('analyst', ''))}, {when(record['at'], zone=False) if record.get('at') else '?'}"


def model_cell(signoff: Signoff, s: int) -> str:
    results = signoff.results
    current = signoff.standing(s) or {}
    c, proposal = signoff.model_index(s), int(results.chosen[s])
    offered = esc(results.names[proposal]) if proposal >= 0 else None
    if current.get("action") == "hold":  # a hold signs no curve: the proposal is only the proposal
        return "none <span class=\"muted\">(held" + (f"; proposal {offered}" if offered else "") + ")</span>"
    model = esc(current.get("model") or results.names[c]) if c >= 0 else "none"
    if c >= 0 and proposal >= 0 and c != proposal:
        model += f" <span class=\"muted\">(proposal {offered})</span>"
    return model


def row(signoff: Signoff, s: int, detailed: set, tell_apart=None, revoked: str | None = None) -> str:
    results = signoff.results
    status = STATUSES[signoff.status[s]]
    numbers = at_plan(signoff, s)
    plan, volume, lo, hi, e = numbers.price, numbers.volume, numbers.lo, numbers.hi, numbers.elasticity
    planned = volume is not None and math.isfinite(plan)
    shown = (f"{alike(volume, lo, hi)[0]} <span class=\"muted\">({interval(lo, hi, volume)})</span>"
             if planned and lo is not None and math.isfinite(lo) else num(volume) if planned else "—")
    if planned and numbers.signed:
        shown += " <span class=\"muted\">as signed</span>"
    current = signoff.standing(s) or {}
    history = signoff.history(s)
    latest = current or (history[-1] if history else {})
    name = label(results, s, tell_apart)
    key = f"<a href=\"#s{s}\">{name}</a>" if s in detailed else name
    carried = " (carried)" if signoff.carried[s] else ""
    time = when(latest["at"], zone=False) if latest.get("at") else ""
    analyst = esc(latest.get("analyst", ""))
    decision = signoff.carried_decision(s)
    if decision is not None:  # the carry is the standing record; the decision it carries is a person's
        analyst += f" <span class=\"muted\">(carries {esc(decision['action'])} by {by_whom(decision)})</span>"
    noted = signoff.note_record(s)
    note = ""
    if noted is not None:  # a note that is not the standing record's own says whose and when it is
        note = esc(noted["note"]) if noted.get("seq") == latest.get("seq") else f"{by_whom(noted)}: {esc(noted['note'])}"
    return (f"<tr data-status=\"{status}\">" + cell("Series", key, "key")
            + cell("Status", status + carried, f"st-{status}") + cell("Model", model_cell(signoff, s))
            + cell("Plan price", plan_price_text(plan, float(results.plan_price[s]), numbers.signed), "num",
                   _sort_value(plan))
            + cell("Volume (95% PI)", shown, "num", _sort_value(volume))
            + cell("Elasticity", elasticity(e, volume, bool(results.price_hi[s] > results.price_lo[s]),
                                            results.candidates[numbers.model].degree == 0)
                   if planned and e is not None else "—", "num",
                   _sort_value(e if planned and e is not None and volume > 0 else None))
            + cell("Flags", _flag_cell(signoff, s, revoked)) + cell("Analyst", analyst)
            + cell("Time", time, "time", esc(latest.get("at", ""))) + cell("Note", note, "note")
            + "</tr>")


def decisions(report: Report, detailed: set) -> str:
    signoff = report.signoff
    rows = signoff.table_rows()
    counts = signoff.counts()
    options = "".join(f"<option value=\"{s}\">{s}</option>" for s in STATUSES if counts[s])
    head = "".join(f"<th class=\"{cls}\">{name}</th>" if cls else f"<th>{name}</th>" for name, cls in COLUMNS)
    body = "".join(row(signoff, int(s), detailed, report.tell_apart, report.revoked(int(s))) for s in rows)
    lead = (f"<p>{num(len(rows))} series: every series a person decided one by one, and every series with a "
            f"stop flag, most in need of attention first. Volumes are at the plan price under the model that "
            f"stands (the proposal while pending or held: a hold signs no curve; a stale series' as signed, on "
            f"its earlier data), with its 95% prediction interval; an override's flags are its own curve's.</p>")
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
