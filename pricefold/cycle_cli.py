"""Across planning cycles: ``ledger carry`` (carry a signed decision to new data where nothing moved) and
``show --ledger`` (what each series needs); ``fit --ledger`` lives in ``fit_ledger``.

The numbers come from ``fitcore.ledger.backtest``; the ledger is read through the verifying reader.
"""
from __future__ import annotations

import sys
from collections import Counter
from dataclasses import dataclass
from pathlib import Path

from fitcore import ledger
from fitcore.data.keys import SEPARATOR
from fitcore.ledger.elsewhere import backtested_elsewhere, without_backtest
from fitcore.ledger.reader import collector_paused
from fitcore.ledger.replay import series_id
from fitcore.ledger.rules import NEWER_DUE, NEWER_DUE_SHORT, decided_on_newer, newer_standing
from fitcore.text import clean, told_apart

from .fit_ledger import must_exist
from .show import key_parts
from .ledger_cli import (MISSING_TAIL, identity, key_mismatch, meets, open_ledger, parse_head, refuse_key_mismatch,
                         say_missing)


def ledger_state(record: dict, book, short: bool = False) -> tuple[str, str | None]:
    """(status in the ledger, what it needs) of a results record (``short``: for the list's column)."""
    from fitcore.ledger.backtest import due, untested_due
    history = book.histories.get(series_id(record["key"]))
    status = history.status(record["fingerprint"]) if history else "pending"
    if status in ("accepted", "overridden") and history.current["action"] == "carry":
        status = f"{status} (carried)"
    needs = None
    if status == "stale" and decided_on_newer(record["key"], record["fingerprint"], record.get("last_date"), history):
        needs = NEWER_DUE_SHORT if short else NEWER_DUE  # as the screen says: the ledger refuses decisions here
    elif status == "stale" and record.get("backtest"):
        bt = record["backtest"]
        stops = [f["code"] for f in record["flags"] if f["code"] in _stop_codes()]
        near = bt["signed_near_best"] if "signed_near_best" in bt else (  # results made before it was kept
            "candidates" in record and _near_best(record, bt.get("candidate")))
        kept = _carried_action(history, bt.get("carries")) == "override" and bool(near)
        needs = due(bt, stops, record["chosen"] is not None, kept)
    if status == "stale" and needs is None:  # a hold signs no curve; anything else: these results hold none
        needs = untested_due(history.current, short) or (
            "not backtested" if short else "no backtest in these results (fit with --ledger)")
    return status, needs


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
                f"{number(at_plan['volume'])}{interval}, " + slope(at_plan))
    if verb == "overridden":
        return [said]
    proposal = record["chosen"] or "nothing"
    return [said, f"accepted as the proposal of another fit of these data: these results propose {proposal} "
                  f"(the chosen line, flags and plan above are {proposal}'s); look again if that changes the decision"]


def _minute(record: dict) -> str:
    return clean(str(record["at"])[:16].replace("T", " ") + " UTC")


def show_with_ledger(records: list[dict], ledger_path: Path, binary=(), header: dict | None = None,
                     results: Path | None = None, whole: bool = True, within=None, first=None) -> str:
    """``pricefold show --ledger``: one series in full with its ledger state and backtest, or a list.  Results
    (``header``, from the file ``results``) keyed by other columns than the ledger's series, or (``whole``:
    ``records`` are every series of the results, no filter) sharing none of them: a warning line on
    stderr; backtested against another ledger: that backtest and its ``shifted`` flags left out, said in one
    line on stderr.  Signed series of the ledger not in the results: a note on stderr, counted within the
    filter (``within``: what a ``--product``/``--key`` filter keeps; a ``--flag`` filter, None and not
    ``whole``, counts none).  Series that look like the ledger's under another spelling are marked
    (``≈North`` where the flags begin; a series in full says which it looks like) and their keys told apart from
    the ledger's spelling (``East⟨U+0020⟩``), filtered or not, as on the screen.  ``first``: a record's rank
    ahead of the attention order (``show.in_attention_order``)."""
    from fitcore.ledger.missing import missing_from
    from fitcore.results.series_columns import results_keys
    from fitcore.review.sentences import shift_sentence

    from .show import detail, in_attention_order, key_cells
    book = open_ledger(ledger_path, must_exist=True)
    like: dict[str, dict] = {}  # series id → the ledger series it looks like
    beside: list[tuple[str, ...]] = []  # the missing signed series' keys as shown: told apart from the list's
    if header is not None:
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
    replaced = [superseded(record, book) for record in records]
    records = [without_backtest(record) if gone else record for record, gone in zip(records, replaced)]
    if len(records) == 1:
        record = records[0]
        status, needs = ledger_state(record, book)
        shown = looks_shown([record], like) or {0: told_apart([key_parts(record["key"])], beside)[0]}
        label = SEPARATOR.join(shown[0])
        lines = [detail(record, binary, label), "", f"ledger: {status}" + (f" — due: {needs}" if needs else "")]
        alike = like.get(series_id(record["key"]))
        if alike is not None:
            lines.append("  " + alike_line(record["key"], alike, book, ledger_path))
        stands = standing_decision(record, book)
        if stands is not None:
            current = book.histories[series_id(record["key"])].current
            lines += ["  " + line for line in
                      stands_words(record, stands, current if current["action"] == "carry" else None,
                                   current.get("signed"))]
        if record.get("backtest"):
            said = shift_sentence(record["backtest"], record["chosen"], older=needs == NEWER_DUE)
            lines.append(f"  since sign-off (the curve as signed): {said}")
        elif replaced[0]:  # the fit tested a decision that no longer stands: its numbers and shifted flag left out
            lines.append("  the backtest in these results tested a decision that no longer stands: not shown (fit "
                         "again with --ledger to test what stands)")
        return "\n".join(lines)
    ordered = in_attention_order(records, first)
    labels = key_cells([record["key"] for record in ordered], shown=looks_shown(ordered, like), beside=beside)
    states = [ledger_state(record, book, short=True) for record in ordered]
    wide = max([21, *(len(needs) for _, needs in states if needs)])  # the longest due in full ("stop flag (a, b)")
    lines = [f"{'series':<40} {'n':>5} {'model':<7} {'status':<20} {'due':<{wide}} {'ratio':>5} {'cover':>5}  flags"]
    for record, label, (status, needs) in zip(ordered, labels, states):
        bt = record.get("backtest") or {}
        ratio = f"{bt['error_ratio']:.1f}" if bt.get("error_ratio") is not None else "—"
        cover = f"{bt['coverage'] * 100:.0f}%" if bt.get("coverage") is not None else "—"
        flags = " ".join(f["code"] for f in record["flags"]) or "—"
        stands = standing_decision(record, book)
        if stands is not None and stands["action"] == "accept":  # the flags are these results' proposal's
            flags = f"proposes {record['chosen'] or 'nothing'}: {flags if record['flags'] else 'no flags'}"
        alike = like.get(series_id(record["key"]))
        if alike is not None:  # as the screen marks it: the ledger's spelling where the flags begin
            flags = f"≈{differing(record['key'], alike)}" + (f" {flags}" if record["flags"] else "")
        model = standing_model(record, book)
        lines.append(f"{label} {record['n']:>5} {model:<7} "
                     f"{status:<20} {needs or '—':<{wide}} {ratio:>5} {cover:>5}  {flags}")
    return "\n".join(lines)


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


# -- ledger carry ------------------------------------------------------------------------------------

@dataclass
class Carryable:
    """A series whose signed decision may be carried, as the results say (checked again under the lock)."""

    key: dict
    fingerprint: str
    chosen: str
    flags: list
    latest: str  # the series' latest ledger record when the results were fitted
    candidate: str  # the signed candidate
    carries: str  # the accept or override the standing decision stands for
    near_best: bool  # the signed candidate is available and within one SE of the lowest CV error
    snapshot: dict | None = None
    revised: bool = False  # carried over a revised history (``--carry-revised``): said in the carry's note


def _stop_codes() -> set[str]:
    from fitcore.review.flags import SEVERITY
    return {code for code, severity in SEVERITY.items() if severity == "stop"}


def _near_best(record: dict, name: str) -> bool:
    """The candidate is available and its CV error within one SE of the lowest (the rule's own band)."""
    cands = [c for c in record["candidates"] if c["available"] and c["cv_mse"] is not None]
    mine = next((c for c in cands if c["name"] == name), None)
    if mine is None:
        return False
    best = min(cands, key=lambda c: c["cv_mse"])
    return mine["cv_mse"] <= best["cv_mse"] + (best["cv_se"] or 0.0)


def newer_first(why: str | None, status: str, key: dict, fingerprint: str, last_date: str | None,
                histories: dict) -> str | None:
    """Carry's reason for leaving a tested series, asked as ``show --ledger`` and the screen ask it: a decision
    standing on newer data than these rows (``decided_on_newer``) first, then ``left_for_human``'s ``why``.
    Only an untested series can be one: a decision on newer data leaves no rows after its last date."""
    from fitcore.ledger.backtest import FAILED, PASSED
    if status in (PASSED, FAILED):
        return why
    if decided_on_newer(key, fingerprint, last_date, histories.get(series_id(key))):
        return NEWER_DUE_SHORT
    return why


def decided_since(history, fingerprint: str) -> bool:
    """Whether a series the results tested now stands on these data (``fingerprint``) by a decision other than
    a carry: accepted, overridden or held by hand since the fit, or revoked back to pending.  Due nothing, as
    ``show --ledger`` says from the ledger as it is now, so carry neither counts it as left nor carries it."""
    if history is None or history.status(fingerprint) == "stale":
        return False
    current = history.current
    return current is None or current["action"] != "carry"


def held_left(keys: list[dict], fingerprints: list, last_dates: list, histories: dict) -> Counter:
    """What ``show --ledger`` says each held series of these results is due (``keys``, ``fingerprints``,
    ``last_dates``: the series whose standing decision is a hold), in carry's count: a hold on other data is
    a new look (or, made on newer data, decided on newer data); a hold on these very data is due nothing."""
    from fitcore.ledger.backtest import HELD_DUE_SHORT
    left: Counter = Counter()
    for key, fingerprint, last_date in zip(keys, fingerprints, last_dates):
        history = histories.get(series_id(key))
        if history is None or history.status(fingerprint) != "stale":
            continue
        newer = decided_on_newer(key, fingerprint, last_date, history)
        left[NEWER_DUE_SHORT if newer else HELD_DUE_SHORT] += 1
    return left


def held_keys(histories: dict) -> list[dict]:
    """The keys of the series whose standing decision is a hold (a hold signs no curve: no backtest names it)."""
    return [h.current["series"] for h in histories.values() if h.current is not None and h.current["action"] == "hold"]


def plan_from_records(records, level: float, controls: list[str] | None = None,
                      overrides: frozenset = frozenset(), histories: dict | None = None, revised_ok: bool = False
                      ) -> tuple[list[Carryable], Counter]:
    """Which series may be carried, from results records (JSON; small runs), and why the others may not
    (``newer_first``, ``left_for_human``, ``held_left``; ``overrides``: the digests of the ledger's overrides;
    ``histories``: the ledger's; ``revised_ok``: ``--carry-revised``)."""
    from fitcore.ledger.backtest import left_for_human
    from fitcore.ledger.snapshot import from_records
    histories, records = histories or {}, list(records)
    stops, keep, left = _stop_codes(), [], Counter()
    held = {series_id(key) for key in held_keys(histories)}
    mine = [record for record in records if held and series_id(record["key"]) in held]
    left.update(held_left([r["key"] for r in mine], [r["fingerprint"] for r in mine],
                          [r.get("last_date") for r in mine], histories))
    for record in records:
        bt = record.get("backtest")
        if bt is None or decided_since(histories.get(series_id(record["key"])), record["fingerprint"]):
            continue
        codes = [f["code"] for f in record["flags"]]
        near = _near_best(record, bt["candidate"])
        why = left_for_human(bt["status"], "shifted" in codes, bool(set(codes) & stops), record["chosen"] is not None,
                             bt["candidate"] != record["chosen"], bt["carries"] in overrides and near,
                             bool(bt.get("revised")), revised_ok)
        why = newer_first(why, bt["status"], record["key"], record["fingerprint"], record.get("last_date"), histories)
        if why is not None:
            left[why] += 1
        else:
            keep.append((record, Carryable(record["key"], record["fingerprint"], record["chosen"], codes, bt["latest"],
                                           bt["candidate"], bt["carries"], near, revised=bool(bt.get("revised")))))
    signed = from_records([(record, c.candidate) for record, c in keep], level, controls)
    for (_, c), snapshot in zip(keep, signed):
        c.snapshot = snapshot
    return [c for _, c in keep], left


def plan_from_stored(path: Path, overrides: frozenset = frozenset(), histories: dict | None = None,
                     revised_ok: bool = False) -> tuple[list[Carryable], Counter]:
    """The same from a Parquet results file or folder, column by column (no Python object per candidate);
    the reason a series is left, series by series through the same rules (``newer_first``, ``left_for_human``,
    ``held_left``)."""
    import numpy as np

    from fitcore.arrays import integers, objects
    from fitcore.data.keys import SeriesKeys
    from fitcore.ledger.backtest import FAILED, PASSED, left_for_human
    from fitcore.ledger.snapshot import from_results
    from fitcore.results.stored import stored_results
    from fitcore.review.flags import CODES
    from fitcore.review.intervals import last_dates
    histories = histories or {}
    results, diagnosis = stored_results(path)
    bt = results.stored_backtest or {}
    status = bt.get("status", np.full(results.n_series, None, dtype=object))
    tested = np.flatnonzero(status != None)  # noqa: E711
    chosen = results.chosen
    names = results.names
    data = results.data
    days = last_dates(results)

    def series_of(index):  # keys, fingerprints and last dates of series ``index``
        index = np.asarray(index, dtype=np.int64)
        keys = [dict(zip(data.key_names, values)) for values in
                zip(*(objects(data.keys[name].take(integers(index))).tolist() for name in data.key_names))]
        last = [None] * len(index) if days is None else \
            [None if np.isnat(d) else str(d) for d in days[index].astype("datetime64[D]")]
        return keys, objects(data.fingerprints.take(integers(index))).tolist(), last
    held, lookup = held_keys(histories), SeriesKeys.of(data)
    at = lookup.indices_of(held) if held else np.zeros(0, np.int64)
    left = held_left(*series_of(at[at >= 0]), histories)
    tested = tested[~_decided(histories, lookup, data.fingerprints)[tested]]
    if not len(tested):
        return [], left
    shifted, stop = diagnosis.flagged("shifted")[tested], diagnosis.n_stop()[tested] > 0
    candidate = bt["candidate"][tested]
    signed = np.array([names.index(n) if n in names else -1 for n in candidate.tolist()], dtype=np.int64)
    cv_mse, cv_se = np.asarray(results.cv_mse)[tested], np.asarray(results.cv_se)[tested]
    available = results.available[tested]
    errors = np.where(available, cv_mse, np.inf)
    best = np.argmin(errors, axis=1)
    rows = np.arange(len(tested))
    at = np.maximum(signed, 0)
    with np.errstate(invalid="ignore"):
        near = (signed >= 0) & available[rows, at] & (cv_mse[rows, at] <= errors[rows, best] + cv_se[rows, best])
    override = np.array([d in overrides for d in bt["carries"][tested].tolist()], dtype=bool)
    has_model = chosen[tested] >= 0
    changed = np.array([None if c < 0 else names[c] for c in chosen[tested].tolist()], dtype=object) != candidate
    revised = bt["revised"][tested].astype(bool) if "revised" in bt else np.zeros(len(tested), bool)  # (older results: none)
    why = [left_for_human(*args, revised_ok=revised_ok)
           for args in zip(status[tested].tolist(), shifted.tolist(), stop.tolist(), has_model.tolist(),
                           changed.tolist(), (override & near).tolist(), revised.tolist())]
    untested = np.flatnonzero(~np.isin(status[tested].astype(str), [PASSED, FAILED]))
    for i, key, fingerprint, last in zip(untested.tolist(), *series_of(tested[untested])):
        why[i] = newer_first(why[i], status[tested[i]], key, fingerprint, last, histories)
    left.update(w for w in why if w is not None)
    mask = np.array([w is None for w in why], dtype=bool) & (signed >= 0)
    ok, signed, near, revised = tested[mask], signed[mask], near[mask], revised[mask]
    if not len(ok):
        return [], left
    snapshots: list = [None] * len(ok)
    for c in np.unique(signed).tolist():
        mine = np.flatnonzero(signed == c)
        for i, snapshot in zip(mine.tolist(), from_results(results, ok[mine], c)):
            snapshots[i] = snapshot
    keys, fingerprints, _ = series_of(ok)
    raised = diagnosis.raised[ok]  # (series, flags) → one number a series (bit j: flag j): a few distinct sets
    bits = 1 << np.arange(raised.shape[1], dtype=np.int64 if raised.shape[1] < 63 else object)
    combos, which = np.unique(raised.astype(bits.dtype) @ bits, return_inverse=True)
    codes = [[CODES[j] for j in range(len(CODES)) if combo >> j & 1] for combo in combos.tolist()]
    chosen_names = [names[c] for c in chosen[ok].tolist()]
    plan = [Carryable(key, fingerprint, chosen_name, list(codes[w]), latest, candidate, carries, close, snapshot, moved)
            for key, fingerprint, chosen_name, w, latest, candidate, carries, close, snapshot, moved in
            zip(keys, fingerprints, chosen_names, which.reshape(-1).tolist(), bt["latest"][ok].tolist(),
                bt["candidate"][ok].tolist(), bt["carries"][ok].tolist(), near.tolist(), snapshots, revised.tolist())]
    return plan, left


def _decided(histories: dict, keys, fingerprints) -> np.ndarray:
    """(S,) ``decided_since`` of each series of ``keys`` (a ``SeriesKeys``), asked only of the ledger's series
    whose standing decision is not a carry (a carry stands on the data it was carried to, or is stale)."""
    import numpy as np

    from fitcore.arrays import integers, objects
    out = np.zeros(len(fingerprints), dtype=bool)
    mine = [h for h in histories.values() if h.current is None or h.current["action"] != "carry"]
    if not mine:
        return out
    at = keys.indices_of([h.latest["series"] for h in mine])
    found = np.flatnonzero(at >= 0)
    prints = objects(fingerprints.take(integers(at[found]))).tolist() if hasattr(fingerprints, "take") else \
        [fingerprints[i] for i in at[found].tolist()]
    for i, fingerprint in zip(found.tolist(), prints):
        out[at[i]] = decided_since(mine[i], fingerprint)
    return out


def run_carry(args) -> int:
    with collector_paused(freeze=True):  # what is made lives until the command ends
        return _carry(args)


def _carry(args) -> int:
    from fitcore.results.read import read_header, read_results, result_parts
    must_exist(args.ledger, "'ledger carry' carries decisions a ledger already holds")
    # the ledger first: a file that is not one, or a broken chain, is said as every command says it
    book = open_ledger(args.ledger, refuse=(ledger.BROKEN, ledger.UNVERIFIABLE))
    stored = result_parts(args.results) is not None or args.results.suffix.lower() in (".parquet", ".pq")
    header = read_header(args.results) if stored else read_results(args.results)[0]
    source = header.get("ledger")
    if not source:
        raise ledger.LedgerError(f"{args.results}: not made by 'pricefold fit --ledger', so it holds no backtest to "
                                 "carry on; fit again with --ledger")
    foreign = backtested_elsewhere(args.results, header, args.ledger)
    if foreign:
        raise ledger.LedgerError(f"{foreign}; fit again with --ledger on this ledger")
    header.pop("key_columns", None)
    digest = ledger.results_digest(header)
    refuse_key_mismatch(args.results, header, book, args.ledger)
    from fitcore.results.series_columns import results_keys
    keys = list(results_keys(args.results))
    said, found = meets(keys, book, args.ledger)
    if said:  # 'fit --ledger' found none of the ledger's series in these data, or not those spelled otherwise
        tail = ("nothing can be carried" if found.new == len(keys) else
                "those are not carried (a decision is carried only to its own spelling)")
        print(f"pricefold ledger: {args.results}: warning: {said}; {tail}", file=sys.stderr)
    say_missing("pricefold ledger", args.results, keys, book, args.ledger)
    overrides = frozenset(r["digest"] for r in book.records if r["action"] == "override")
    if stored:
        plan, left = plan_from_stored(args.results, overrides, book.histories, args.carry_revised)
    else:
        from fitcore.ledger.snapshot import header_terms  # numpy and the families: not for every --help
        plan, left = plan_from_records(read_results(args.results)[1], header["settings"].get("level", 0.95),
                                       header_terms(header["settings"]), overrides, book.histories,
                                       args.carry_revised)
    read = str(source.get("head", ""))
    witness = parse_head(read)
    if witness is None or not book.holds(*witness):
        said = f"{witness[0]}:{witness[1][:12]}" if witness else clean(read[:20])
        raise ledger.LedgerError(f"{args.ledger}: no longer holds record {said}…, the head 'fit --ledger' "
                                 f"read (it now ends at {book.head_text[:20]}…: records were removed or the file "
                                 "replaced); nothing was carried")
    outcome: Counter = Counter()

    def decide(records):  # under the lock: book.histories is what the ledger holds now
        outcome.clear()
        for c in plan:
            history = book.histories.get(series_id(c.key))
            current = history.current if history else None
            if current is not None and current["action"] == "carry" and current["fingerprint"] == c.fingerprint:
                outcome["already carried"] += 1
            elif history is None or history.latest["digest"] != c.latest:
                outcome["changed since the fit"] += 1
            else:
                entry = ledger.Entry(series=c.key, action="carry", fingerprint=c.fingerprint, results=digest,
                                     model=c.candidate, proposed=c.chosen, note=carry_note(args.note, c.revised),
                                     supersedes=c.latest, flags=c.flags, signed=c.snapshot, carries=c.carries)
                if newer_standing(entry, history) is not None:  # the ledger would refuse the whole batch
                    outcome[NEWER_DUE_SHORT] += 1
                else:
                    yield entry

    written = book.append(decide, identity(args.analyst))
    left.update(outcome)  # held series (a hold signs no curve: no backtest names it) are counted in ``left``
    if not args.quiet:
        already = left.pop("already carried", 0)  # done by an earlier run: nothing left for anyone
        rest = " · ".join(f"{why} {count:,}" for why, count in left.most_common() if count) or "none"
        carried = (f"carried {len(written):,} signed series to the new data → {args.ledger}" if written
                   else f"carried no series: nothing written to {args.ledger}")  # not "→ L" when L is as it was
        over = sum(1 for r in written if REVISED_NOTE in (r.get("note") or ""))
        print(carried + (f" ({already:,} carried already)" if already else "")
              + (f"; {over:,} of them over a revised history (--carry-revised; said in their notes)" if over else ""),
              file=sys.stderr)
        print(f"left for a human: {sum(left.values()):,} ({rest})", file=sys.stderr)
        print(f"ledger head {book.head_text}", file=sys.stderr)
    return 0


REVISED_NOTE = "history revised since signing: carried with --carry-revised"


def carry_note(note: str, revised: bool) -> str:
    """A carry's note: the analyst's, and where the rows it was signed on were revised, that it was carried over
    them on purpose — so the ledger, show and the report tell such a carry from a clean one."""
    return f"{note}; {REVISED_NOTE}" if revised and note else REVISED_NOTE if revised else note


def superseded(record: dict, book) -> bool:
    """The results' backtest of a series tested a decision that no longer stands (a hold, a revoke or another
    decision recorded since the fit; a carry of the decision tested is that decision, standing on): its numbers
    and ``shifted`` flag are not the standing decision's."""
    bt = record.get("backtest")
    if not bt or not bt.get("decision"):
        return False
    history = book.histories.get(series_id(record["key"]))
    current = history.current if history is not None else None
    if current is None:
        return True
    if current["action"] == "carry" and current.get("carries") == (bt.get("carries") or bt["decision"]):
        return False  # carried to these data since the fit: the decision tested, standing on
    return current["digest"] != bt["decision"]


def _carried_action(history, digest: str | None) -> str | None:
    """The action (accept or override) of the decision with ``digest`` in a series' history."""
    if history is None:
        return None
    return next((r["action"] for r in reversed(history.records) if r["digest"] == digest), None)
