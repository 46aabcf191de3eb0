"""Exceptions in full: one section per overridden, held, noted or stop-flagged series.

Each holds the chart (observations, the curve that stands, the proposal when it differs, the
95% band, the plan price), the candidate table, the flags with their sentences and the series'
ledger history.
"""
from __future__ import annotations

import math

from fitcore.ledger.signoff import STATUSES, Signoff
from fitcore.review.flags import SEVERITY
from fitcore.review.plan_words import weighed_zero

from .page import Report, alike, cell, elasticity, esc, interval, num, price, stale_parts, when
from .tables import at_plan, by_whom, label


def candidates(signoff: Signoff, s: int) -> str:
    results = signoff.results
    # "stands" only where a decision stands: a pending series' proposal is only the proposal
    standing, proposal = signoff.model_index(s) if signoff.standing(s) else -1, int(results.chosen[s])
    stands = ("stands" if STATUSES[signoff.status[s]] != "stale" else "signed on newer data, refitted to these"
              if signoff.newer[s] else "signed on earlier data, refitted")
    planned = math.isfinite(float(results.plan_price[s]))
    rows, missing = [], []
    for c, name in enumerate(results.names):
        if not results.available[s, c]:
            missing.append(f"<li><code>{esc(name)}</code>: {esc(results.reason_text(s, c))}</li>")
            continue
        marks = [word for word, hit in ((stands, c == standing), ("proposal", c == proposal)) if hit]
        at = (results.plan_volume[s, c], results.plan_lo[s, c], results.plan_hi[s, c])
        volume = (f"{alike(*at)[0]} <span class=\"muted\">({interval(at[1], at[2], at[0])})</span>"
                  if planned else "—")
        mark = f" <strong>({', '.join(marks)})</strong>" if marks else ""
        rows.append("<tr>" + cell("candidate", esc(name) + mark)
                    + cell("CV MSE ± SE", f"{num(results.cv_mse[s, c])} ± {num(results.cv_se[s, c])}", "num")
                    + cell("Q²", _share(results.q2[s, c]), "num") + cell("R²", _share(results.r2[s, c]), "num")
                    + cell("plan volume (95% PI)", volume, "num")
                    + cell("elasticity", elasticity(results.plan_elasticity[s, c], results.plan_volume[s, c],
                                                    results.price_hi[s] > results.price_lo[s],
                                                    results.candidates[c].degree == 0)
                           if planned else "—", "num")
                    + "</tr>")
    table = ("<div class=\"wide\"><table class=\"cards-small\"><thead><tr><th>candidate</th>"
             "<th class=\"num\">CV MSE ± SE</th><th class=\"num\">Q²</th><th class=\"num\">R²</th>"
             "<th class=\"num\">plan volume (95% PI)</th>"
             f"<th class=\"num\">elasticity</th></tr></thead><tbody>{''.join(rows)}</tbody></table></div>")
    if missing:
        table += f"<p class=\"muted\">Not available:</p><ul class=\"muted\">{''.join(missing)}</ul>"
    return table


def _share(x) -> str:
    x = float(x)
    return f"{x * 100:.0f}%".replace("-", "−") if math.isfinite(x) else "n/a"


NEWER_STALE = "The last sign-off was made on newer data than these results: read the report of the newer results."


def flags(signoff: Signoff, s: int, revoked: str | None = None) -> str:
    """The flags with their sentences; where an override stands, its own curve's codes first (as the decisions
    table and the export give them), the sentences then said to be the proposal's (they read as the standing
    curve's: an override going below zero showed none, one that did not showed the proposal's; a trial).
    ``revoked``: what a stale series whose decision a revoke left is due (``Report.revoked``), after ``stale``'s
    sentence."""
    listed = signoff.diagnosis.flags_of(int(s))
    lead = ""
    if s in signoff.overrides:
        own, model = signoff.codes(s), esc(signoff.overrides[s][0])
        proposal = esc(signoff.results.names[int(signoff.results.chosen[s])])
        codes = ", ".join(f"<span class=\"sev-{SEVERITY[code]}\">{esc(code)}</span>" for code in own) or "none"
        lead = (f"<p><strong>{model}, which stands:</strong> {codes}."
                + (f" The sentences below are of the proposal, {proposal}:</p>" if listed else "</p>"))
    if not listed:
        return lead or "<p>No flags.</p>"
    listed.sort(key=lambda f: f["severity"] != "stop")
    if signoff.newer[s]:  # not "the data behind the last sign-off have changed": these results are the older
        listed = [{**f, "message": NEWER_STALE} if f["code"] == "stale" else f for f in listed]
    if revoked is not None:  # as show --ledger and the screen say it: carry leaves it for a person
        listed = [{**f, "message": f"{f['message']} Due: {revoked}."} if f["code"] == "stale" else f for f in listed]
    items = "".join(f"<li><span class=\"sev-{f['severity']}\">{f['severity']} · {esc(f['code'])}</span>: "
                    f"{esc(f['message'])}</li>" for f in listed)
    return f"{lead}<ul class=\"flags\">{items}</ul>"


def since(report: Report, s: int) -> str:
    """A series signed on other data: its signed curve's backtest and this cycle's proposal beside it, as
    the triage screen says it (empty when nothing was tested, or ``shifted``'s sentence says it already)."""
    from fitcore.review.sentences import shift_sentence
    signoff = report.signoff
    record = report.backtest.record(s) if report.backtest is not None else None
    if record is None or STATUSES[signoff.status[s]] != "stale" or signoff.diagnosis.flagged("shifted")[s]:
        return ""
    chosen = int(signoff.results.chosen[s])
    proposal = signoff.results.names[chosen] if chosen >= 0 else None
    return f"<p><strong>Since sign-off:</strong> {esc(shift_sentence(record, proposal, older=signoff.newer[s]))}</p>"


def history(signoff: Signoff, s: int) -> str:
    records = signoff.history(s)
    if not records:
        return "<p>No decisions recorded.</p>"
    items = []
    for r in records:
        action = esc(r.get("action"))
        model = esc(r.get("model") or "")
        if r.get("action") == "override":
            model = f"{model} instead of {esc(r.get('proposed'))}"
        how = " <span class=\"muted\">(bulk)</span>" if signoff.is_bulk(r) else ""
        note = f" — <span class=\"note\">{esc(r['note'])}</span>" if r.get("note") else ""
        items.append(f"<li value=\"{int(r['seq']) if isinstance(r.get('seq'), int) else 0}\">{when(r.get('at'))} "
                     f"{esc(r.get('analyst'))}: <strong>{action}</strong> {model}{how}{note}</li>")
    return f"<ol class=\"history\">{''.join(items)}</ol>"


def chart_figure(drawn) -> str:
    """The chart and, under it, its key in HTML (line samples drawn by the style sheet)."""
    if not drawn.svg:
        return "<p class=\"muted\">No chart: no candidate could be fitted.</p>"
    keys = [(kind, text) for kind, text in (
        ("standing", drawn.standing), ("proposal", drawn.proposal),
        ("band", "95% prediction band" if drawn.band else ""),
        ("plan", f"plan price {drawn.plan}" if drawn.plan else ""), ("points", "observed" if drawn.points else ""),
        ("zero", "rows of weight 0 (not observations)" if drawn.weight_0 else ""))
        if text]
    key = " ".join(f"<span class=\"legend-item\"><span class=\"swatch {kind}\"></span>{esc(text)}</span>"
                   for kind, text in keys)
    missing = f" No observations or band: {esc(drawn.note)}." if drawn.note and not drawn.points else ""
    return f"<figure class=\"chart\">{drawn.svg}<figcaption>{key}{missing}</figcaption></figure>"


def section(report: Report, s: int) -> str:
    signoff = report.signoff
    results = signoff.results
    status = STATUSES[signoff.status[s]]
    numbers = at_plan(signoff, s)
    plan, c = numbers.price, numbers.model
    current = signoff.standing(s) or {}
    zero = weighed_zero(None if results.weight_0 is None else results.weight_0[s])
    facts = [f"status <strong class=\"st-{status}\">{status}</strong>",
             f"{num(results.data.counts[s])} observation{'s' * int(results.data.counts[s] != 1)}{zero}",
             f"prices {price(results.price_lo[s])}–{price(results.price_hi[s])}"]
    if current.get("action") == "hold":  # a hold signs no curve
        facts.append(f"held by {by_whom(current)} UTC: no curve signed")
    decision = signoff.carried_decision(s)
    if decision is not None:
        facts.append(f"carried by {by_whom(current)} UTC: the {esc(decision['action'])} by {by_whom(decision)} UTC")
    if math.isfinite(plan) and c >= 0 and numbers.volume is not None:
        name = esc(current.get("model") if numbers.signed else results.names[c])
        on = "newer" if signoff.newer[s] else "earlier"
        under = (f"under {name} as signed on {on} data" if numbers.signed else
                 f"under {name}, the proposal" if numbers.proposal else f"under {name}")
        now = float(results.plan_price[s])
        moved = numbers.signed and math.isfinite(now) and not math.isclose(now, plan, rel_tol=1e-12, abs_tol=0.0)
        facts.append(f"at the {'signed ' if moved else ''}plan price {price(plan)}: "
                     f"{alike(numbers.volume, numbers.lo, numbers.hi)[0]} "
                     f"({interval(numbers.lo, numbers.hi, numbers.volume)}) {under}")
        if moved:  # this plan prices it otherwise: the signed curve there is in "Since sign-off" (a trial)
            facts.append(f"<strong>this plan prices it at {price(now)}</strong> (the signed curve there: since sign-off)")
        elif not numbers.signed and not results.price_lo[s] <= plan <= results.price_hi[s]:
            facts.append("<span class=\"sev-stop\">outside the observed prices: an extrapolation</span>")
    figure = chart_figure(report.chart(s))
    return (f"<article class=\"exception\" id=\"s{s}\"><h3>{label(results, s, report.tell_apart)}</h3>"
            f"<p class=\"meta\">{' · '.join(facts)}</p>{figure}<h4>Candidates</h4>{candidates(signoff, s)}"
            f"<h4>Flags</h4>{flags(signoff, s, report.revoked(s))}{since(report, s)}"
            f"<h4>Ledger</h4>{history(signoff, s)}</article>")


def exceptions(report: Report, decided, flagged, more: int) -> str:
    signoff = report.signoff
    counts = signoff.counts()
    older = stale_parts(counts)  # overrides and holds standing on older data are exceptions in full too
    lead = (f"<p>{num(counts['overridden'])} overridden, {num(counts['held'])} held{older}, "
            f"{num(int(signoff.noted.sum()))} with notes; then {num(len(flagged))} series with a stop flag, most in "
            "need of attention first.")
    if more:
        lead += (f" <strong>{num(more)} more stop-flagged series are not shown in detail</strong>: they are listed "
                 "in the decisions table.")
    lead += "</p>"
    parts = [section(report, int(s)) for s in decided] + [section(report, int(s)) for s in flagged]
    if not parts:
        parts = ["<p>No overridden, held, noted or stop-flagged series.</p>"]
    return f"<section id=\"exceptions\"><h2>Exceptions in full</h2>{lead}{''.join(parts)}</section>"
