"""The report's HTML page: the document and its security policy, text and number formats, the summary.

Everything from data or notes passes through ``esc`` (control characters replaced, then HTML
escaped); numbers through ``num``/``price``.  The page loads nothing: its one style sheet and its
one small script are inline, allowed by their SHA-256 hashes in the content-security policy, and
the charts are inline SVG styled by attributes.
"""
from __future__ import annotations

import base64
import hashlib
import html
import math
from dataclasses import dataclass
from datetime import datetime, timezone
from importlib import resources
from typing import Callable

from fitcore.ledger.signoff import LedgerView, Signoff, flag_table
from fitcore.outputs.seal import blank_tag
from fitcore.review.flags import FLAGS
from fitcore.review.formats import HUGE, fmt, money, two_places
from fitcore.review.plan_words import WEIGHTED
from fitcore.review.plan_words import caution_of as plan_caution
from fitcore.text import clean, printable

GENERATOR = "pricefold report"
MEANING = {code: meaning for code, _, meaning in FLAGS}


def caution_of(header: dict) -> str:
    """The page's caution, naming the controls and season the fit held fixed (as ``show`` closes with it)."""
    return plan_caution(header.get("settings") or {}, "pricefold proposes; the analyst decides and signs.")


@dataclass(frozen=True)
class Report:
    """What the page is made of.  ``chart(s)`` gives series ``s``'s chart (``charts.Drawn``);
    ``data_note`` says why every chart lacks its observations (None when the data are there)."""

    title: str
    generated: datetime
    results_path: str
    header: dict
    signoff: Signoff
    ledger: LedgerView
    data_note: str | None
    chart: Callable[[int], object]
    version: str = ""
    backtest: object = None  # the signed curves' backtest (``Backtest`` or ``StoredBacktest``; None: none)
    # where results and ledger part: signed series not in the results, series spelled otherwise (one clause each)
    apart: tuple = ()
    tell_apart: Callable | None = None  # a key told apart from those signed series' (``told_apart_from``)
    missing: tuple = ()  # those signed series, each named (``Missing.listed``)
    head_gone: str | None = None  # the ledger no longer holds the head the results' fit read (``elsewhere.head_gone``)

    def revoked(self, s: int) -> str | None:
        """What stale series ``s`` is due where a revoke left its standing decision and nobody has decided it since,
        in full ('revoked by bo (root) at 2026-12-05 14:07 UTC: "want a fresh look"'), by the rule the screen, ``show
        --ledger`` and carry go by (``due.recorded_due``: decided on newer data, held, changed since the fit of the
        results' own backtest come first); None where it is due anything else."""
        from fitcore.ledger.backtest import StoredBacktest
        from fitcore.ledger.due import recorded_due, revoked_due
        from fitcore.ledger.signoff import STATUSES
        signoff = self.signoff
        history = signoff.histories.get(int(s))
        if STATUSES[signoff.status[s]] != "stale" or history is None or history.revoked is None:
            return None
        stored = isinstance(self.backtest, StoredBacktest)
        said = recorded_due(history, lambda: bool(signoff.newer[s]), self.backtest.record(s) if stored else None,
                            stored)
        return said if said == revoked_due(history) else None


def esc(text) -> str:
    """Users' text made safe for HTML: control characters replaced, markup characters escaped."""
    return html.escape(clean("" if text is None else str(text)), quote=True)


def num(x) -> str:
    """A quantity with thousands separators and a true minus sign: 3,912 · −268.9 · 0.0372."""
    return esc(fmt(None if x is None else float(x))).replace("-", "−")


def interval(lo, hi, beside=None) -> str:
    """'877–1,205', or '−294 to −244' when a bound is negative (a dash between minus signs misleads); in the
    format of the volume ``beside`` it too (``alike``)."""
    joiner = " to " if (lo is not None and float(lo) < 0) or (hi is not None and float(hi) < 0) else "–"
    low, high = alike(lo, hi, beside)[:2]
    return f"{low}{joiner}{high}"


def alike(*values) -> list[str]:
    """``num`` of each of ``values`` in one format: where any is past ``fmt``'s grouped digits (1e9 and up), all in
    three significant digits ("6.66e+08 (4.42e+07–1.29e+09)", not "666,152,270 (44,196,121–1.29e+09")."""
    finite = [float(x) for x in values if x is not None and math.isfinite(float(x))]
    if not any(abs(x) >= HUGE for x in finite):
        return [num(x) for x in values]
    return ["n/a" if x is None or not math.isfinite(float(x)) else esc(f"{float(x):.3g}").replace("-", "−")
            for x in values]


def price(x) -> str:
    return esc(money(None if x is None else float(x)))


def elasticity(x, volume=None, varied: bool = True, flat: bool = False) -> str:
    """The elasticity at the plan price; none at a ``volume`` at or below zero (a ratio of relative changes
    means nothing there: the screen and ``show`` say the same), nor where price never ``varied`` in the series
    (nothing measured it); a ``flat`` curve's 0 said to be the model's choice, not a measurement (as ``show`` and
    the screen say it; the export leaves it empty)."""
    if not varied:
        return '<span title="price never varied in this series: nothing measures an elasticity">not estimable</span>'
    if volume is not None and float(volume) <= 0:
        return '<span title="no elasticity: the volume is at or below zero">n/a</span>'
    if flat:
        return ('<span title="a flat curve: its 0 is the model\'s choice (no price term), not a measurement">'
                "flat</span>")
    if x is None or not math.isfinite(float(x)):
        return "n/a"
    return two_places(float(x)).replace("-", "−")


def when(stamp, zone: bool = True) -> str:
    """An ISO time as '2026-12-02 14:02 UTC' (as written when it does not parse)."""
    try:
        moment = datetime.fromisoformat(str(stamp).replace("Z", "+00:00")).astimezone(timezone.utc)
    except ValueError:
        return esc(stamp)
    return moment.strftime("%Y-%m-%d %H:%M" + (" UTC" if zone else ""))


def cell(label: str, content, kind: str = "", sort: str | None = None) -> str:
    """One table cell; ``label`` names it when a phone shows the row as a card, ``sort`` is the value
    the page's script sorts by."""
    extra = (f" class=\"{kind}\"" if kind else "") + (f" data-sort=\"{sort}\"" if sort is not None else "")
    return f"<td{extra} data-label=\"{label}\">{content}</td>"


def asset(name: str) -> str:
    return resources.files(__package__).joinpath(name).read_text(encoding="utf-8")


def _hash(text: str) -> str:
    return "'sha256-" + base64.b64encode(hashlib.sha256(text.encode("utf-8")).digest()).decode("ascii") + "'"


def document(report: Report, body: str) -> str:
    """The whole page: a policy that lets nothing load and only this page's own style and script run."""
    style, script = asset("report.css"), asset("table.js")
    policy = (f"default-src 'none'; style-src {_hash(style)}; script-src {_hash(script)}; img-src 'none'; "
              "font-src 'none'; connect-src 'none'; base-uri 'none'; form-action 'none'")
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            f"<meta http-equiv=\"Content-Security-Policy\" content=\"{policy}\">\n"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
            "<meta name=\"referrer\" content=\"no-referrer\">\n"
            f"<meta name=\"generator\" content=\"{GENERATOR} {esc(report.version)}\">\n"
            f"{blank_tag()}\n"  # sealed once whole (``fitcore.outputs.seal``): a later run replaces it only unchanged
            f"<title>{esc(report.title)}</title>\n<style>{style}</style>\n</head>\n<body>\n{body}\n"
            f"<script>{script}</script>\n</body>\n</html>\n")


def alerts(report: Report) -> str:
    """What must be read first: a ledger that cannot be trusted, charts without their data."""
    view, out = report.ledger, []
    if report.head_gone:  # the chain may verify: what is gone is what the results were made against
        out.append(f"<div class=\"alert\" role=\"alert\"><strong>The ledger is not the one these results were "
                   f"made against:</strong> {esc(report.head_gone)}. The decisions recorded after that point are not "
                   "in it now, so the statuses below read the ledger as it is, and the results' backtest read "
                   "records that are gone. Check it with <code>pricefold ledger verify "
                   f"{esc(view.path)} --head …</code> against a head kept elsewhere, or fit again with "
                   "<code>--ledger</code>.</div>")
    if view.state == "broken":
        out.append(f"<div class=\"alert\" role=\"alert\"><strong>The ledger's chain is broken:</strong> "
                   f"{esc(view.problem)}. Its records may have been edited, removed or reordered, so the decisions "
                   f"below cannot be trusted until it is repaired (<code>pricefold ledger verify "
                   f"{esc(view.path)}</code> lists every problem).</div>")
    elif view.state == "unverifiable":
        out.append("<div class=\"alert\" role=\"alert\"><strong>The ledger could not be verified:</strong> it is "
                   "keyed (HMAC-SHA-256) and this report was made without its key (PRICEFOLD_LEDGER_KEY), so "
                   "nobody has checked that its records are as they were written. Make the report again with the "
                   "key set.</div>")
    if view.state == "absent":
        out.append(f"<div class=\"notice\">No ledger at <code>{esc(view.path)}</code>: no decision has been "
                   "recorded, so every series is pending.</div>")
    if view.problem and view.state == "intact":
        out.append(f"<div class=\"notice\">{esc(view.problem)}</div>")
    newer = report.signoff.counts()["stale_newer"]
    if newer:  # results older than the ledger's decisions: the page would call the newest decisions old
        out.append(f"<div class=\"alert\" role=\"alert\"><strong>{num(newer)} "
                   f"{'series was' if newer == 1 else 'series were'} decided on newer data than these results:"
                   "</strong> this page is made from older results, so those decisions read as stale here and their "
                   "numbers are the signed ones, not these results'. Make the report from the newer results.</div>")
    if report.data_note:
        out.append(f"<div class=\"notice\">{esc(report.data_note)} The charts show the fitted curves without the "
                   "observations or the prediction band.</div>")
    return "\n".join(out)


def _facts(pairs) -> str:
    return "<dl class=\"facts\">" + "".join(f"<dt>{k}</dt><dd>{v}</dd>" for k, v in pairs) + "</dl>"


def rejects_state(header: dict, results_path: str) -> str:
    """'' where the rejects file the results record is beside them as recorded; else a clause saying it is missing
    or not that file (a run killed between putting the rejects file and the results in place, or an edit)."""
    data = header.get("input", {})
    name, digest = data.get("rejects_file"), data.get("rejects_sha256")
    if not name or not digest:
        return ""
    from pathlib import Path

    from fitcore.data.columns import file_sha256
    where = Path(results_path)
    where = where / name if where.is_dir() else where.with_name(name)
    try:
        same = file_sha256(where) == digest
    except OSError:
        return f"; its rejects file {where} is missing"
    return "" if same else f"; {where} is not the rejects file these results record (changed since)"


def _settings(header: dict, names: list[str], results_path: str = "") -> list[tuple[str, str]]:
    settings = header.get("settings", {})
    data = header.get("input", {})
    cands = ", ".join(names)
    folds = settings.get("folds")
    fold_text = "leave-one-out" if folds == "loo" else f"{esc(folds)}, {esc(settings.get('fold_order'))}"
    if settings.get("fold_order") == "shuffled" and folds != "loo":
        fold_text += f" (seed {esc(settings.get('seed'))})"
    plan = settings.get("plan") or {}
    plan_text = (f"per series from <code>{esc(plan['file'])}</code>" if plan.get("file") else
                 price(plan["price"]) + " for every series" if plan.get("price") is not None else "none")
    rows, rejected = data.get("rows"), data.get("rejected")
    return [("Data file", f"<code>{esc(data.get('path'))}</code>"),
            ("Data digest", f"<span class=\"digest\">SHA-256 {esc(data.get('sha256'))}</span>"),
            ("Rows", f"{num(rows)} read, {num(rejected or 0)} rejected{esc(rejects_state(header, results_path))}"
             if rows is not None else "n/a"),
            ("Candidates", esc(cands)), ("Weights", weights_text(settings)),
            ("Controls", controls_text(settings)), ("Folds", fold_text),
            ("Rule", esc(settings.get("rule"))),
            ("Interval", f"{float(settings.get('level', 0.95)) * 100:.0f}% prediction interval"),
            ("Plan price", plan_text)]


def controls_text(settings: dict) -> str:
    """The columns held fixed while every curve is fitted, and the season's terms: 'none' without; the plan
    volumes hold them at each series' plan values (the plan file's, else the defaults said here)."""
    controls = settings.get("controls") or {}
    season = int(controls.get("season") or 0)
    columns = [name for name in controls.get("terms", []) if not name.startswith("season_")]
    if not columns and not season:
        return "none"
    defaults = controls.get("plan_values") or {}
    parts = [f"<code>{esc(name)}</code>" + (" (0/1)" if name in controls.get("binary", []) else "")
             for name in columns]
    if season:
        parts.append(f"season: {season} sine/cosine pair{'s' * (season != 1)} of the day of the year")
    held = "; ".join(f"{esc(name)} {esc(value)}" for name, value in defaults.items())
    return ", ".join(parts) + "; plan volumes hold them at " + (held or "each series' plan values")


def weights_text(settings: dict) -> str:
    """'none (every row counts alike)', or the weight column: a weighted fit is another model (a trial's report of
    one did not say it was weighted)."""
    column = (settings.get("columns") or {}).get("weight")
    return f"column <code>{esc(column)}</code> ({WEIGHTED})" if column else "none (every row counts alike)"


def _ledger_facts(report: Report) -> list[tuple[str, str]]:
    view = report.ledger
    words = {"intact": "intact: every record's digest and link checked",
             "broken": "<strong class=\"sev-stop\">broken</strong>",
             "unverifiable": "<strong class=\"sev-stop\">not verified</strong> (keyed, no key given)",
             "absent": "no ledger yet"}
    kind = {"hmac-sha256": "keyed HMAC-SHA-256", "sha256": "SHA-256"}.get(view.kind or "", "")
    chain = words.get(view.state, esc(view.state)) + (f" ({kind})" if kind else "")
    if report.head_gone and view.state == "intact":  # intact as far as it goes: a copy that ends earlier verifies too
        chain += " — but it ends before records these results were made against (see the alert above)"
    pairs = [("Ledger file", f"<code>{esc(view.path)}</code>"),
             ("Chain", chain),
             ("Head", f"<span class=\"digest\">{esc(view.head)}</span>" if view.head else "none"),
             ("Records", num(len(view.records)))]
    if report.signoff.unmatched:
        pairs.append(("Other series", f"{num(report.signoff.unmatched)} records name series that are not in "
                                      "these results"))
    return pairs


def stale_parts(counts: dict) -> str:
    """' (3 decided on newer data; 1 overridden, 2 held on older data)': the stale series decided on newer data than
    these results, and those whose standing decision on older data is an override or a hold."""
    parts = [f"{num(counts[key])} {word}" for key, word in (("stale_overridden", "overridden"), ("stale_held", "held"))
             if counts.get(key)]
    said = [f"{', '.join(parts)} on older data"] if parts else []
    if counts.get("stale_newer"):
        said.insert(0, f"{num(counts['stale_newer'])} decided on newer data")
    return f" ({'; '.join(said)})" if said else ""


def summary(report: Report) -> str:
    signoff = report.signoff
    counts = signoff.counts()
    cards = [("series", counts["total"], ""), ("accepted", counts["accepted"],
              f" ({num(counts['carried'])} carried)" if counts["carried"] else ""),
             ("overridden", counts["overridden"], ""), ("held", counts["held"], ""),
             ("pending", counts["pending"], ""), ("stale", counts["stale"], stale_parts(counts))]
    card_html = "".join(f"<li><span class=\"n\">{num(n)}</span>{word}{extra}</li>" for word, n, extra in cards)
    apart = "".join(f"<p class=\"notice\">{html.escape(printable(said[0].upper() + said[1:]))}.</p>"  # shown forms in
                    for said in report.apart)
    if report.missing:  # each by name: an approver checks what left, not only how many
        items = "".join(f"<li>{html.escape(printable(line))}</li>" for line in report.missing)
        apart += (f"<details class=\"missing\"><summary>The signed series not in these results</summary>"
                  f"<ul>{items}</ul></details>")
    flags = flag_table(signoff)
    flag_rows = "".join(f"<tr><td><code>{code}</code></td><td class=\"sev-{sev}\">{sev}</td>"
                        f"<td class=\"num\">{num(n)}</td><td>{esc(MEANING[code])}</td></tr>" for code, sev, n in flags)
    flag_html = ("<div class=\"wide\"><table><thead><tr><th>flag</th><th>severity</th><th class=\"num\">series</th>"
                 f"<th>meaning</th></tr></thead><tbody>{flag_rows}</tbody></table></div>"
                 if flags else "<p>No series carries a flag.</p>")
    clean_count = int((~signoff.raised.any(axis=1)).sum())  # by the flags the rows show: an override's its own
    return (f"<section id=\"summary\"><h2>Summary</h2><ul class=\"cards\">{card_html}</ul>{apart}"
            f"<p class=\"caution\">{esc(caution_of(report.header))}</p>"
            f"<div class=\"grid2\"><div><h3>Data and settings</h3>"
            f"{_facts(_settings(report.header, signoff.results.names, report.results_path))}</div>"
            f"<div><h3>Ledger</h3>{_facts(_ledger_facts(report))}</div></div>"
            f"<h3>Flags</h3><p>{num(clean_count)} series carry no flag.</p>{flag_html}</section>")
