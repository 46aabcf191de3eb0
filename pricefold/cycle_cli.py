"""Across planning cycles: ``show --ledger`` (what each series needs); ``ledger carry`` lives in ``carry_cli``,
``fit --ledger`` in ``fit_ledger``.

The numbers come from ``fitcore.ledger.backtest``; the ledger is read through the verifying reader.
"""
from __future__ import annotations

import sys
from functools import lru_cache
from pathlib import Path

from fitcore.data.keys import SEPARATOR
from fitcore.ledger.elsewhere import HEAD_GONE_TAIL, StandingNow, backtested_elsewhere, head_gone, without_backtest
from fitcore.ledger.replay import series_id
from fitcore.ledger.rules import NEWER_DUE, NEWER_DUE_SHORT, decided_on_newer, what_stands
from fitcore.review.thresholds import recorded_thresholds
from fitcore.text import clean, told_apart

from .ledger_cli import key_mismatch, meets, open_ledger, say_missing, say_unchecked
from .show import key_parts


def ledger_state(record: dict, book, short: bool = False, fitted: bool = False, thresholds=None,
                 full=None) -> tuple[str, str | None]:
    """(status in the ledger, what it needs) of a results record (``short``: for the list's column; ``fitted``: the
    results were fitted with --ledger on this ledger).  What the ledger's records say first (``recorded_due``:
    decided on newer data, held, changed since the fit, revoked), as carry counts it and the screen says it;
    else the results' backtest, an override's stop flags those of the curve it makes stand (``due_codes``;
    ``thresholds()``: the fit's, ``full()``: the whole record where ``record`` holds no candidates)."""
    from fitcore.ledger.due import carried_across, due, recorded_due
    history = book.histories.get(series_id(record["key"]))
    status = history.status(record["fingerprint"]) if history else "pending"
    if status in ("accepted", "overridden") and history.current["action"] == "carry":
        status = f"{status} (carried)"
    if status != "stale":
        return status, None
    needs = recorded_due(history, lambda: decided_on_newer(record["key"], record["fingerprint"],
                                                           record.get("last_date"), history),
                         record.get("backtest"), fitted, short)
    if needs is None and record.get("backtest"):
        bt = record["backtest"]
        override = _carried_action(history, bt.get("carries")) == "override"
        stops = [code for code in due_codes(record, bt.get("candidate"), override, thresholds, full)
                 if code in stop_codes()]
        near = bt["signed_near_best"] if "signed_near_best" in bt else (  # results made before it was kept
            "candidates" in record and near_best(record, bt.get("candidate")))
        kept = bool(near) if override else None
        needs = due(bt, stops, record["chosen"] is not None, kept)
        if not short:  # what a carry would carry it across besides new rows, said in its note too
            needs = "; ".join([needs, *carried_across(bt)])
    if needs is None:  # these results hold no backtest of it
        needs = "not backtested" if short else "no backtest in these results (fit with --ledger)"
    return status, needs


def due_codes(record: dict, model: str | None, override: bool, thresholds=None, full=None) -> list[str]:
    """The flag codes whose stop flags a stale series is due by (``due.left_for_human``): where the decision its
    backtest tested is an ``override`` (of ``model``), those of the curve a carry would make stand on these data
    (``candidate_checks.carried_codes``, as ``ledger carry`` judges and records them); else the results' (its
    proposal's).  ``thresholds()``: the fit's (None: pricefold's defaults); ``full()``: the whole record where
    ``record`` holds no candidates (a Parquet list)."""
    if not override:
        return [f["code"] for f in record["flags"]]
    from fitcore.review.candidate_checks import carried_codes
    from fitcore.review.thresholds import Thresholds
    whole = record if "candidates" in record or full is None else full()
    return carried_codes(whole, model, thresholds() if thresholds else Thresholds())


def standing_decision(record: dict, book) -> dict | None:
    """The accept or override (made here, or carried forward) whose model stands on the series of a results
    ``record`` on its data in place of its proposal (``SeriesHistory.standing_model``): any override, and an
    accept of another model than these results propose (made on another fit of the same data); else None."""
    history = book.histories.get(series_id(record["key"]))
    model = history.standing_model(record["fingerprint"]) if history is not None else None
    decision = history.decision if model is not None else None
    if decision is None or (decision["action"] == "accept" and model == record["chosen"]):
        return None
    return decision


def standing_model(record: dict, book) -> str:
    """The list's model: the one signed where a decision stands (on these data or, stale, on earlier ones:
    as the export and the report give it), ↺ for an override; else this cycle's proposal."""
    history = book.histories.get(series_id(record["key"]))
    decision = history.decision if history is not None else None
    if decision is not None and decision["action"] in ("accept", "override") and decision.get("model"):
        return f"{decision['model']}↺" if decision["action"] == "override" else str(decision["model"])
    return record["chosen"] or "—"


def stands_words(record: dict, stands: dict, carry: dict | None = None, signed: dict | None = None) -> list[str]:
    """'stands: poly1, overridden by ana at …; at the plan price 2.50: volume 250.0 (204.1 to 295.9), elasticity
    -0.71' — the standing model's own numbers from the record's candidates; for a decision ``carry`` carried
    to these data, said as its refit on them (the curve as signed is the backtest's line).  Where these
    results did not fit that model (``--no-loglog`` after a loglog was signed), the numbers of the ``signed``
    snapshot of the standing record at this plan price, as ``ledger export`` gives them, said to be the signed
    curve's.  An accept of another model than these results propose adds a line saying so."""
    from fitcore.ledger.snapshot import at_prices

    from .show import money, number, slope
    model = stands["model"]
    verb = "accepted" if stands["action"] == "accept" else "overridden"
    said = f"stands: {clean(str(model))}, {verb} by {clean(str(stands['analyst']))} at {_minute(stands)}"
    if carry is not None:
        said += f", carried by {clean(str(carry['analyst']))} at {_minute(carry)}"
    plan = record.get("plan")
    cand = next((c for c in record["candidates"] if c["name"] == model), None)
    at_plan, whose = None, "its refit on these data at" if carry is not None else "at"
    if cand is not None and cand.get("plan_volume") is not None:
        at_plan = {"volume": cand["plan_volume"], "lo": cand["plan_lo"], "hi": cand["plan_hi"],
                   "elasticity": cand["plan_elasticity"]}
    elif cand is None:  # not fitted here: the signed curve's numbers, never these results'
        whose = f"these results did not fit {clean(str(model))}: the curve as signed, at"
        if not (signed and (signed.get("basis") or {}).get("coef")):
            said += f" (these results did not fit {clean(str(model))}, and the ledger holds no curve of it)"
        elif plan and plan.get("price") is not None:
            at_plan = at_prices([signed], [plan["price"]], plan["level"])[0]  # at the level signed, if it says
    if plan and at_plan is not None:
        interval = (f" ({number(at_plan['lo'])} to {number(at_plan['hi'])})"
                    if at_plan.get("lo") is not None and at_plan.get("hi") is not None else " (no interval)")
        said = (f"{said}; {whose} the plan price {number(plan['price'], money)}: volume "
                f"{number(at_plan['volume'])}{interval}, " + slope(at_plan, record, model))
        lo, hi = record["price_range"]
        if lo is not None and hi is not None and not lo <= plan["price"] <= hi:  # as the plan line and the screen
            said += " — an extrapolation (outside the prices observed)"
    if verb == "overridden":
        return [said]
    proposal = record["chosen"] or "nothing"
    return [said, f"accepted as the proposal of another fit of these data: these results propose {proposal} "
                  f"(the chosen line, flags and plan above are {proposal}'s); look again if that changes the decision"]


def _minute(record: dict) -> str:
    return clean(str(record["at"])[:16].replace("T", " ") + " UTC")


def show_with_ledger(records: list[dict], ledger_path: Path, binary=(), header: dict | None = None,
                     results: Path | None = None, whole: bool = True, within=None, first=None,
                     flag: str | None = None, full=None) -> str | None:
    """``pricefold show --ledger``: one series in full with its ledger state and backtest, or a list.  Results
    (``header``, from the file ``results``) keyed by other columns than the ledger's series, or (``whole``:
    ``records`` are every series of the results, no filter) sharing none of them: a warning line on
    stderr; backtested against another ledger: that backtest and its ``shifted`` flags left out, said in one
    line on stderr.  Signed series of the ledger not in the results: a note on stderr, counted within the
    filter (``within``: what a ``--product``/``--key`` filter keeps; a ``--flag`` filter, None and not
    ``whole``, counts none).  Series that look like the ledger's under another spelling are marked
    (``≈North`` where the flags begin; a series in full says which it looks like) and their keys told apart from
    the ledger's spelling (``East⟨U+0020⟩``), filtered or not, as on the screen.  ``first``: a record's rank
    ahead of the attention order (``show.in_attention_order``).  A series an override stands on (not stale) is
    listed, ranked and picked by its own curve's flags and Q² (``standing_flags``), not its proposal's; ``full(i)``:
    the whole record of ``records[i]`` where they hold no candidates (a Parquet list).  ``flag``: ``--flag``'s
    code, kept by the flags shown (the records not picked by it beforehand); None, said why on stderr, when
    none is kept."""
    from fitcore.ledger.missing import missing_from
    from fitcore.results.series_columns import results_keys
    from fitcore.review.sentences import shift_sentence

    from .show import detail, in_attention_order, key_cells
    book = open_ledger(ledger_path, must_exist=True)
    # whether the results' flags (before any is left out below) name ``flag``: else the filter matches nothing
    raised = flag is not None and any(f["code"] == flag for record in records for f in record["flags"])
    like: dict[str, dict] = {}  # series id → the ledger series it looks like
    beside: list[tuple[str, ...]] = []  # the missing signed series' keys as shown: told apart from the list's
    foreign = None  # "RESULTS: backtested against L, not THIS": their backtest left out
    if header is not None:
        gone = head_gone(results, header, book.records, ledger_path)
        if gone:  # said first: what follows reads the ledger as it is now, the results' backtest as it was
            print(f"pricefold show: warning: {gone}; {HEAD_GONE_TAIL}", file=sys.stderr)
        said, tail = key_mismatch(header, book, ledger_path), "every series reads as pending"
        # the look-alikes and the missing are judged against every series of the results, not the filter's
        keys = [record["key"] for record in records] if whole else list(results_keys(results))
        if said is None and book.histories:  # the same key columns: is any of the ledger's series among these?
            found_said, found = meets(keys, book, ledger_path)
            ledger_keys = [h.latest["series"] for h in book.histories.values()]
            like = {series_id(keys[i]): ledger_keys[j] for i, j in found.looks_like().items()}
            if whole:
                said = found_said
                if found.new < len(keys):
                    tail = "they read as pending, beside the ledger's own"
        if said:
            print(f"pricefold show: {results}: warning: {said}; {tail}", file=sys.stderr)
        if whole or within is not None:  # keyed otherwise, or none shared: none is counted (another clause says it)
            gone = say_missing("pricefold show", results, keys, book, ledger_path, None if whole else within)
        else:  # a --flag filter: none counted, the listed still told apart from the missing spellings
            gone = missing_from(keys, book.histories)
        # the listed told apart from every missing spelling, not only those the filter names in its note
        beside = (gone if whole or within is None else missing_from(keys, book.histories)).shown()
        foreign = backtested_elsewhere(results, header, ledger_path)
        if foreign:
            print(f"pricefold show: {foreign}; its backtest and 'shifted' flags are left out (fit again with "
                  "--ledger on this ledger)", file=sys.stderr)
            records = [without_backtest(record) for record in records]
    fitted = header is not None and bool(header.get("ledger")) and not foreign  # what the fit read: this ledger
    standing_now = StandingNow(history.current for history in book.histories.values())
    replaced = [superseded(record, standing_now) for record in records]
    records = [without_backtest(record) if gone else record for record, gone in zip(records, replaced)]
    thresholds = lru_cache(lambda: recorded_thresholds(((header or {}).get("settings") or {}).get("thresholds"),
                                                       results))  # the fit's, as the export judges by
    wholes = [(lambda i=i: full(i)) if full else None for i in range(len(records))]  # an override's candidates
    standing = [standing_flags(record, book, thresholds, whole) for record, whole in zip(records, wholes)]
    say_unchecked("pricefold show", results, sum(not checked for _, checked, _ in filter(None, standing)))
    listed = [record if mine is None else {**record, "flags": mine[0], "score": mine[2]}
              for record, mine in zip(records, standing)]
    if flag is not None:  # listed by what is shown: a flag left out above, or a proposal's, picks nothing
        kept = [i for i, record in enumerate(listed) if any(f["code"] == flag for f in record["flags"])]
        if not kept:
            if not raised:
                print(f"pricefold show: no series in {results} matches", file=sys.stderr)
            elif any(f["code"] == flag for record in records for f in record["flags"]):
                print(f"pricefold show: no series listed: the '{flag}' flags of {results} are of proposals that an "
                      "override replaced with a curve not carrying it", file=sys.stderr)
            else:
                why = ("speak of another ledger's signed curves" if foreign else
                       "tested decisions that no longer stand")
                print(f"pricefold show: no series listed: the '{flag}' flags of {results} {why}, and are left out "
                      f"(fit again with --ledger {ledger_path})", file=sys.stderr)
            return None
        records, replaced = [records[i] for i in kept], [replaced[i] for i in kept]
        listed, standing, wholes = [listed[i] for i in kept], [standing[i] for i in kept], [wholes[i] for i in kept]
        if len(kept) == 1 and full is not None and "candidates" not in records[0]:  # in full: its whole record
            records = [without_backtest(full(kept[0])) if replaced[0] or foreign else full(kept[0])]
    if len(records) == 1:
        record = records[0]  # in full: the results' proposal, the override's own flags said apart below
        status, needs = ledger_state(record, book, fitted=fitted, thresholds=thresholds, full=wholes[0])
        shown = looks_shown([record], like) or {0: told_apart([key_parts(record["key"])], beside)[0]}
        label = SEPARATOR.join(shown[0])
        weight = ((header or {}).get("settings", {}).get("columns") or {}).get("weight")
        lines = [detail(record, binary, label, weight), "",
                 f"ledger: {status}" + (f" — due: {needs}" if needs else "")]
        alike = like.get(series_id(record["key"]))
        if alike is not None:
            lines.append("  " + alike_line(record["key"], alike, book, ledger_path))
        stands = standing_decision(record, book)
        history = book.histories.get(series_id(record["key"]))
        if stands is not None:
            current = history.current
            lines += ["  " + line for line in
                      stands_words(record, stands, current if current["action"] == "carry" else None,
                                   current.get("signed"))]
            if standing[0] is not None:  # an override: its curve's flags, beside the proposal's above
                codes = " ".join(f["code"] for f in standing[0][0]) or "none"
                lines.append(f"  flags of {clean(str(current['model']))} (the flags above are the proposal's): {codes}")
        elif history is not None and history.current is not None and history.current["action"] == "carry":
            lines.append(f"  {what_stands(history.current, history.carried)}")  # who carried, whose accept
        if record.get("backtest"):
            said = shift_sentence(record["backtest"], record["chosen"], older=needs == NEWER_DUE)
            lines.append(f"  since sign-off (the curve as signed): {said}")
        elif replaced[0]:  # the fit tested a decision that no longer stands: its numbers and shifted flag left out
            lines.append("  the backtest in these results tested a decision that no longer stands: not shown (fit "
                         "again with --ledger to test what stands)")
        if record.get("plan") and record["chosen"]:  # one series in full, as without --ledger (whether --flag or a
            # filter picked it): a prediction's caution
            from fitcore.review.plan_words import caution_of
            lines += ["", caution_of((header or {}).get("settings") or {})]
        return "\n".join(lines)
    state_of = {id(record): ledger_state(record, book, short=True, fitted=fitted, thresholds=thresholds, full=whole)
                for record, whole in zip(listed, wholes)}
    # a stale series ranks as the screen ranks it: its 'stale' one stop flag more
    ordered = in_attention_order(listed, first, stale=[state_of[id(record)][0] == "stale" for record in listed])
    labels = key_cells([record["key"] for record in ordered], shown=looks_shown(ordered, like), beside=beside)
    states = [state_of[id(record)] for record in ordered]
    newer = sum(needs == NEWER_DUE_SHORT for _, needs in states)
    if newer:  # as export warns and the report alerts: these results are older than those decisions
        print(f"pricefold show: {results}: note: {newer:,} of the series listed {'was' if newer == 1 else 'were'} "
              "decided on newer data than these results; show the newer results for them", file=sys.stderr)
    wide = max([21, *(len(needs) for _, needs in states if needs)])  # the longest due in full ("stop flag (a, b)")
    lines = [f"{'series':<40} {'n':>5} {'model':<7} {'status':<20} {'due':<{wide}} {'ratio':>5} {'cover':>5}  flags"]
    for record, label, (status, needs) in zip(ordered, labels, states):
        bt = record.get("backtest") or {}
        ratio = f"{bt['error_ratio']:.1f}" if bt.get("error_ratio") is not None else "—"
        cover = f"{bt['coverage'] * 100:.0f}%" if bt.get("coverage") is not None else "—"
        flags = " ".join(f["code"] for f in record["flags"]) or "—"
        stands = standing_decision(record, book)
        model = standing_model(record, book)
        # the flags are these results' proposal's: beside an accept of another, or a model signed on other data
        stale_other = status == "stale" and record["chosen"] and model.rstrip("↺") != record["chosen"]
        if (stands is not None and stands["action"] == "accept") or stale_other:
            flags = f"proposes {record['chosen'] or 'nothing'}: {flags if record['flags'] else 'no flags'}"
        alike = like.get(series_id(record["key"]))
        if alike is not None:  # as the screen marks it: the ledger's spelling where the flags begin
            flags = f"≈{differing(record['key'], alike)}" + (f" {flags}" if record["flags"] else "")
        lines.append(f"{label} {record['n']:>5} {model:<7} "
                     f"{status:<20} {needs or '—':<{wide}} {ratio:>5} {cover:>5}  {flags}")
    return "\n".join(lines)


def standing_flags(record: dict, book, thresholds, full=None) -> tuple[list[dict], bool, float | None] | None:
    """``(flags, checked, score)`` of a series where an override stands on its data (overridden, carried or not):
    the flags its own curve carries, as ``ledger export`` writes them (``candidate_checks.standing_codes``) — the
    series' own and the proposal's kept with their sentences, the curve's checks added with its severity and no
    sentence; ``checked`` false where no curve could be checked; ``score``: that curve's Q² (None where these
    results did not fit it), the score its row ranks by on the screen and in the report.  ``thresholds()``: the
    fit's; ``full()``: the whole record where ``record`` holds no candidates.  None where no override stands (accepted, pending, held,
    or stale: signed on other data, the results' flags are of this cycle's proposal)."""
    history = book.histories.get(series_id(record["key"]))
    if history is None or history.status(record["fingerprint"]) != "overridden":
        return None
    current = history.current
    model = current.get("model")
    if not model or model == record["chosen"]:
        return None
    from fitcore.review.candidate_checks import standing_codes  # its curves' loops: with the first override
    from fitcore.review.flags import SEVERITY
    whole = record if "candidates" in record or full is None else full()
    cand = next((c for c in whole.get("candidates") or () if c["name"] == model), None)
    lo, hi = whole.get("price_range") or (None, None)
    had = {f["code"]: f for f in record["flags"]}
    codes, checked = standing_codes(list(had), cand, current.get("signed") or None,
                                    (whole.get("plan") or {}).get("price"), lo, hi, thresholds())
    return ([had.get(code) or {"code": code, "severity": SEVERITY[code], "message": ""} for code in codes], checked,
            None if cand is None else cand["q2"])


def show_missing(results: Path, header: dict, ledger_path: Path, within) -> None:
    """Where ``show --ledger``'s filter matched no series of the results: the ledger's signed series it would keep,
    said as missing by the unfiltered note's rule (a product renamed in the data: its old name matches no row, its
    decisions are in the ledger; one the results hold under another spelling said as such)."""
    from fitcore.results.series_columns import results_keys
    say_missing("pricefold show", results, list(results_keys(results)), open_ledger(ledger_path, must_exist=True),
                ledger_path, within)


def looks_shown(records: list[dict], like: dict[str, dict]) -> dict[int, tuple[str, ...]]:
    """The key parts of the look-alikes among ``records`` (by place; ``like``: series id → the ledger series' key) as
    the screen's list shows them: told apart from the ledger's spelling (``fitcore.ledger.respelling.beside``)."""
    from fitcore.ledger.respelling import beside
    if not like:
        return {}
    out = {}
    for i, record in enumerate(records):
        alike = like.get(series_id(record["key"]))
        if alike is not None:
            out[i] = beside(record["key"].values(), [alike.get(name) for name in record["key"]])[0]
    return out


def differing(key: dict, like: dict) -> str:
    """'North': the ledger's spelling of the values ``key`` spells otherwise (as the screen's ``≈North``)."""
    from fitcore.ledger.respelling import ledger_spelling
    return ledger_spelling(tuple(key.values()), tuple(like.get(name) for name in key))


def alike_line(key: dict, like: dict, book, ledger_path: Path) -> str:
    """'looks like lemons · North in L under another spelling (region "north" for "North"), a series these results do
    not hold (ana accepted poly1 at …); a decision records it as a new series beside that one' — the screen's
    sentence (``fitcore.ledger.respelling.looks_like``) for ``show``."""
    from fitcore.ledger.respelling import looks_like
    names = list(key)
    history = book.histories.get(series_id(like))
    said = looks_like(names, tuple(key.values()), tuple(like[name] for name in names), clean(str(ledger_path)),
                      history.latest if history is not None else None)
    return (f"looks like {said}; a decision records it as a new series beside that one (fix the spelling in the "
            "data to keep its decisions)")


def stop_codes() -> set[str]:
    from fitcore.review.flags import SEVERITY
    return {code for code, severity in SEVERITY.items() if severity == "stop"}


def near_best(record: dict, name: str) -> bool:
    """The candidate is available and its CV error within one SE of the lowest (the rule's own band)."""
    cands = [c for c in record["candidates"] if c["available"] and c["cv_mse"] is not None]
    mine = next((c for c in cands if c["name"] == name), None)
    if mine is None:
        return False
    best = min(cands, key=lambda c: c["cv_mse"])
    return mine["cv_mse"] <= best["cv_mse"] + (best["cv_se"] or 0.0)


def superseded(record: dict, standing: StandingNow) -> bool:
    """The results' backtest of a series tested a decision that no longer stands (a hold, a revoke or another
    decision recorded since the fit; a carry of the decision tested is that decision, standing on: ``StandingNow``,
    the rule the export, the report and the screen ask too): its numbers and ``shifted`` flag are not the
    standing decision's."""
    bt = record.get("backtest") or {}
    return standing.superseded(bt.get("decision"), bt.get("carries"))


def _carried_action(history, digest: str | None) -> str | None:
    """The action (accept or override) of the decision with ``digest`` in a series' history."""
    if history is None:
        return None
    return next((r["action"] for r in reversed(history.records) if r["digest"] == digest), None)
