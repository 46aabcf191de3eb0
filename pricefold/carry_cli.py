"""``ledger carry``: carry a signed decision to new data where nothing moved (the backtest passed, the shape is
still the proposal, no stop flag, no shift; no revoke left it standing), by the rule ``show --ledger`` says as
what is due (``fitcore.ledger.due.left_for_human``, after ``moved_since``).
"""
from __future__ import annotations

import sys
from collections import Counter
from dataclasses import dataclass
from pathlib import Path

from fitcore import ledger
from fitcore.ledger.due import CHANGED_DUE_SHORT, changed_since_fit, recorded_due
from fitcore.ledger.elsewhere import backtested_elsewhere, head_gone
from fitcore.collector import collector_paused
from fitcore.ledger.replay import series_id
from fitcore.ledger.rules import NEWER_DUE_SHORT, decided_on_newer, newer_standing

from .cycle_cli import near_best, stop_codes
from .fit_ledger import must_exist
from .ledger_cli import identity, meets, open_ledger, record, refuse_key_mismatch, say_missing


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
    across: tuple = ()  # what else it is carried across (``due.carried_across``): said in the note, counted


def newer_first(why: str | None, status: str, key: dict, fingerprint: str, last_date: str | None,
                histories: dict) -> str | None:
    """Carry's reason for leaving a tested series, asked as ``show --ledger`` and the screen ask it: a decision
    standing on newer data than these rows (``decided_on_newer``) first, then ``left_for_human``'s ``why``.
    Only an untested series can be one: a decision on newer data leaves no rows after its last date."""
    from fitcore.ledger.due import FAILED, PASSED
    if status in (PASSED, FAILED):
        return why
    if decided_on_newer(key, fingerprint, last_date, histories.get(series_id(key))):
        return NEWER_DUE_SHORT
    return why


def moved_since(tested: dict | None, history, key: dict, fingerprint: str, last_date: str | None) -> str | None:
    """Carry's reason for leaving a stale series by what its ledger records say, whatever its backtest: the ledger
    moved on for it since the fit (``tested``: the results' backtest of it, or None; ``due.changed_since_fit``), or
    what stands on it is what a revoke left, nobody having decided it since (``SeriesHistory.revoked``) — as
    ``show --ledger`` and the screen say it: decided on newer data first, then changed since the fit, then
    revoked; None where neither holds (or it is held: ``held_left``)."""
    if history is None or history.current is None or history.current["action"] == "hold":
        return None
    if not changed_since_fit(tested, history) and history.revoked is None:
        return None
    return recorded_due(history, lambda: decided_on_newer(key, fingerprint, last_date, history), tested, True, True)


def decided_since(history, fingerprint: str) -> bool:
    """Whether a series the results tested now stands on these data (``fingerprint``) by a decision other than
    a carry: accepted, overridden or held by hand since the fit, or revoked back to pending.  Due nothing, as
    ``show --ledger`` says from the ledger as it is now, so carry neither counts it as left nor carries it."""
    if history is None or history.status(fingerprint) == "stale":
        return False
    current = history.current
    return current is None or current["action"] != "carry"


def carried_already(history, fingerprint: str) -> bool:
    """Whether a series stands carried to these very data (``fingerprint``): an earlier run carried it, with
    ``--carry-revised`` or without.  Counted as "carried already", never left for a human, whatever these
    results' backtest would say of it now (a revised history left for a human by a plain run)."""
    current = history.current if history is not None else None
    return current is not None and current["action"] == "carry" and current["fingerprint"] == fingerprint


def held_left(keys: list[dict], fingerprints: list, last_dates: list, histories: dict) -> Counter:
    """What ``show --ledger`` says each held series of these results is due (``keys``, ``fingerprints``,
    ``last_dates``: the series whose standing decision is a hold), in carry's count: a hold on other data is
    a new look (or, made on newer data, decided on newer data); a hold on these very data is due nothing."""
    from fitcore.ledger.due import HELD_DUE_SHORT
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
                      overrides: frozenset = frozenset(), histories: dict | None = None, revised_ok: bool = False,
                      cov_known: bool = True, fitted: dict | None = None,
                      thresholds=None) -> tuple[list[Carryable], Counter]:
    """Which series may be carried, from results records (JSON; small runs), and why the others may not
    (``newer_first``, ``left_for_human``, ``held_left``; ``overrides``: the digests of the ledger's overrides;
    ``histories``: the ledger's; ``revised_ok``: ``--carry-revised``).  An override is judged by the flags of the
    curve it makes stand (``carried_codes``, by the fit's ``thresholds``), and carried with them."""
    from fitcore.ledger.due import beyond_signed, carried_across, left_for_human
    from fitcore.ledger.snapshot import from_records
    from fitcore.review.candidate_checks import carried_codes
    from fitcore.review.thresholds import Thresholds
    thresholds = thresholds or Thresholds()
    histories, records = histories or {}, list(records)
    stops, keep, left = stop_codes(), [], Counter()
    held = {series_id(key) for key in held_keys(histories)}
    mine = [record for record in records if held and series_id(record["key"]) in held]
    left.update(held_left([r["key"] for r in mine], [r["fingerprint"] for r in mine],
                          [r.get("last_date") for r in mine], histories))
    for record in records:
        bt, history = record.get("backtest"), histories.get(series_id(record["key"]))
        if decided_since(history, record["fingerprint"]) or series_id(record["key"]) in held:  # held: counted above
            continue
        if carried_already(history, record["fingerprint"]):
            left[ALREADY] += 1
            continue
        moved = moved_since(bt, history, record["key"], record["fingerprint"], record.get("last_date"))
        if moved is not None:  # (stale here: not decided since, not carried already)
            left[moved] += 1
        if moved is not None or bt is None:
            continue
        codes = (carried_codes(record, bt["candidate"], thresholds) if bt["carries"] in overrides
                 else [f["code"] for f in record["flags"]])
        near = near_best(record, bt["candidate"])
        why = left_for_human(bt["status"], "shifted" in codes, bool(set(codes) & stops), record["chosen"] is not None,
                             bt["candidate"] != record["chosen"], near if bt["carries"] in overrides else None,
                             bool(bt.get("revised")), revised_ok,
                             beyond_signed(bt.get("price"), bt.get("planned"), bt.get("signed_price_lo"),
                                           bt.get("signed_price_hi")))
        why = newer_first(why, bt["status"], record["key"], record["fingerprint"], record.get("last_date"), histories)
        if why is not None:
            left[why] += 1
        else:
            keep.append((record, Carryable(record["key"], record["fingerprint"], record["chosen"], codes, bt["latest"],
                                           bt["candidate"], bt["carries"], near, revised=bool(bt.get("revised")),
                                           across=tuple(carried_across(bt)))))
    signed = from_records([(record, c.candidate) for record, c in keep], level, controls, cov_known, fitted)
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
    from fitcore.ledger.due import FAILED, PASSED, beyond_signed, carried_across, left_for_human
    from fitcore.ledger.snapshot import from_results
    from fitcore.results.stored import stored_results
    from fitcore.review.flags import CODES, SEVERITY
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
    tested = tested[~_decided(histories, lookup, data.fingerprints)[tested] & ~np.isin(tested, at)]  # held: above
    carried = _carried(histories, lookup, data.fingerprints)[tested]
    left[ALREADY] += int(carried.sum())
    tested = tested[~carried]
    moved = _moved(histories, lookup, data.fingerprints, status, bt.get("latest"), series_of)
    left.update(moved.values())
    tested = tested[~np.isin(tested, list(moved))]
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
    own = _overrides_own(results, diagnosis, tested, override, candidate)
    for i, codes in own.items():  # an override is judged by the curve it makes stand
        stop[i] = any(SEVERITY[code] == "stop" for code in codes)
    has_model = chosen[tested] >= 0
    changed = np.array([None if c < 0 else names[c] for c in chosen[tested].tolist()], dtype=object) != candidate
    revised = bt["revised"][tested].astype(bool) if "revised" in bt else np.zeros(len(tested), bool)  # (older results: none)
    beyond = [beyond_signed(*args) for args in zip(*(bt[name][tested].tolist() if name in bt else [None] * len(tested)
                                                     for name in ("price", "planned", "signed_price_lo",
                                                                  "signed_price_hi")))]  # (older results: not judged)
    why = [left_for_human(*args)
           for args in zip(status[tested].tolist(), shifted.tolist(), stop.tolist(), has_model.tolist(),
                           changed.tolist(), np.where(override, near, None).tolist(), revised.tolist(),
                           [revised_ok] * len(tested), beyond)]
    untested = np.flatnonzero(~np.isin(status[tested].astype(str), [PASSED, FAILED]))
    for i, key, fingerprint, last in zip(untested.tolist(), *series_of(tested[untested])):
        why[i] = newer_first(why[i], status[tested[i]], key, fingerprint, last, histories)
    left.update(w for w in why if w is not None)
    mask = np.array([w is None for w in why], dtype=bool) & (signed >= 0)
    ok, signed, near, revised = tested[mask], signed[mask], near[mask], revised[mask]
    own = {j: own[i] for j, i in enumerate(np.flatnonzero(mask).tolist()) if i in own}  # by place in ``ok``
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
    across_columns = [name for name in ("signed_price", "price", "planned", "settings_changed") if name in bt]
    across = [tuple(carried_across(dict(zip(across_columns, values))))
              for values in zip(*(bt[name][ok].tolist() for name in across_columns))] or [()] * len(ok)
    plan = [Carryable(key, fingerprint, chosen_name, list(own.get(i, codes[w])), latest, candidate, carries, close,
                      snapshot, moved, over)
            for i, (key, fingerprint, chosen_name, w, latest, candidate, carries, close, snapshot, moved, over) in
            enumerate(zip(keys, fingerprints, chosen_names, which.reshape(-1).tolist(), bt["latest"][ok].tolist(),
                          bt["candidate"][ok].tolist(), bt["carries"][ok].tolist(), near.tolist(), snapshots,
                          revised.tolist(), across))]
    return plan, left


def _overrides_own(results, diagnosis, tested, override, candidate) -> dict:
    """Place in ``tested`` → the flag codes of the curve an override would make stand there (``carried_codes_in``:
    its own where it is another candidate than the proposal), for each series of ``tested`` whose signed decision
    is an ``override`` (a few: asked one by one); the proposal's flags stand for every other series."""
    import numpy as np

    from fitcore.review.candidate_checks import carried_codes_in
    from fitcore.review.flags import CODES
    out = {}
    for i in np.flatnonzero(override).tolist():
        s = int(tested[i])
        codes = [code for code, hit in zip(CODES, diagnosis.raised[s]) if hit]
        out[i] = carried_codes_in(results, s, candidate[i], codes, diagnosis.thresholds, diagnosis.controls_outside(s))
    return out


def _decided(histories: dict, keys, fingerprints) -> np.ndarray:
    """(S,) ``decided_since`` of each series of ``keys`` (a ``SeriesKeys``), asked only of the ledger's series
    whose standing decision is not a carry (a carry stands on the data it was carried to, or is stale)."""
    mine = [h for h in histories.values() if h.current is None or h.current["action"] != "carry"]
    return _asked(mine, decided_since, keys, fingerprints)


def _moved(histories: dict, keys, fingerprints, status, latest, series_of) -> dict:
    """Series index → why carry leaves it, for each series of ``keys`` the ledger moved on for since the fit or
    whose standing decision a revoke left (``moved_since``; ``status``, ``latest``: the stored backtest's columns;
    ``series_of``: index → keys, fingerprints, last dates), asked of the ledger's series whose standing decision
    is on other data."""
    mine = [h for h in histories.values() if h.current is not None and h.current["action"] != "hold"]
    moved = {}  # index → (history, what the fit tested): the few asked their keys and words below
    for history, s, fingerprint in _found(mine, keys, fingerprints):
        tested = None if status[s] is None else {"latest": latest[s]}
        if history.status(fingerprint) == "stale" and (changed_since_fit(tested, history) or history.revoked):
            moved[s] = history, tested
    return {s: moved_since(tested, history, key, fingerprint, last) for (s, (history, tested)), key, fingerprint, last
            in zip(moved.items(), *series_of(list(moved)))}


def _carried(histories: dict, keys, fingerprints) -> np.ndarray:
    """(S,) ``carried_already`` of each series of ``keys``, asked of the ledger's series standing carried."""
    mine = [h for h in histories.values() if h.current is not None and h.current["action"] == "carry"]
    return _asked(mine, carried_already, keys, fingerprints)


def _asked(histories: list, ask, keys, fingerprints) -> np.ndarray:
    """(S,) ``ask(history, fingerprint)`` for the series of ``keys`` that ``histories`` name, False elsewhere."""
    import numpy as np
    out = np.zeros(len(fingerprints), dtype=bool)
    for history, s, fingerprint in _found(histories, keys, fingerprints):
        out[s] = ask(history, fingerprint)
    return out


def _found(histories: list, keys, fingerprints) -> list[tuple]:
    """(history, series index, fingerprint there) for each of ``histories`` whose series ``keys`` holds."""
    import numpy as np

    from fitcore.arrays import integers, objects
    if not histories:
        return []
    at = keys.indices_of([h.latest["series"] for h in histories])
    found = np.flatnonzero(at >= 0)
    prints = objects(fingerprints.take(integers(at[found]))).tolist() if hasattr(fingerprints, "take") else \
        [fingerprints[i] for i in at[found].tolist()]
    return [(histories[i], s, fingerprint) for i, s, fingerprint in zip(found.tolist(), at[found].tolist(), prints)]


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
        from fitcore.ledger.snapshot import fit_terms, header_terms  # numpy and the families: not for every --help
        from fitcore.results.control_fields import cov_known
        from fitcore.review.thresholds import recorded_thresholds
        settings = header["settings"]
        plan, left = plan_from_records(read_results(args.results)[1], settings.get("level", 0.95),
                                       header_terms(settings), overrides, book.histories, args.carry_revised,
                                       cov_known(settings), fit_terms(settings),
                                       recorded_thresholds(settings.get("thresholds"), args.results))
    gone = head_gone(args.results, header, book.records, args.ledger)
    if gone:  # its backtest read records that are gone: carrying on it would supersede what it never read
        raise ledger.LedgerError(f"{gone}; nothing was carried")
    outcome: Counter = Counter()
    across: Counter = Counter()  # what the carries written were carried across, as their notes say it

    def decide(records):  # under the lock: book.histories is what the ledger holds now
        outcome.clear(), across.clear()
        for c in plan:
            history = book.histories.get(series_id(c.key))
            if carried_already(history, c.fingerprint):  # by a run at the same time
                outcome[ALREADY] += 1
            elif history is None or history.latest["digest"] != c.latest:  # moved on since (``moved_since``)
                outcome[CHANGED_DUE_SHORT] += 1
            else:
                entry = ledger.Entry(series=c.key, action="carry", fingerprint=c.fingerprint, results=digest,
                                     model=c.candidate, proposed=c.chosen,
                                     note=carry_note(args.note, c.revised, c.across),
                                     supersedes=c.latest, flags=c.flags, signed=c.snapshot, carries=c.carries)
                if newer_standing(entry, history) is not None:  # the ledger would refuse the whole batch
                    outcome[NEWER_DUE_SHORT] += 1
                else:
                    across.update(c.across)
                    yield entry

    written = record(book, decide, identity(args.analyst))
    left.update(outcome)  # held series (a hold signs no curve: no backtest names it) are counted in ``left``
    if not args.quiet:
        already = left.pop(ALREADY, 0)  # done by an earlier run: nothing left for anyone
        rest = " · ".join(f"{why} {count:,}" for why, count in left.most_common() if count) or "none"
        carried = (f"carried {len(written):,} signed series to the new data → {args.ledger}" if written
                   else f"carried no series: nothing written to {args.ledger}")  # not "→ L" when L is as it was
        over = sum(1 for r in written if REVISED_NOTE in (r.get("note") or ""))
        print(carried + (f" ({already:,} carried already)" if already else "")
              + (f"; {over:,} of them over a revised history (--carry-revised; said in their notes)" if over else "")
              + across_words(across), file=sys.stderr)
        print(f"left for a human: {sum(left.values()):,} ({rest})", file=sys.stderr)
        print(f"ledger head {book.head_text}", file=sys.stderr)
    return 0


ALREADY = "already carried"  # a series an earlier run carried to these data: in the summary's "(N carried already)"
REVISED_NOTE = "history revised since signing: carried with --carry-revised"


def carry_note(note: str, revised: bool, across=()) -> str:
    """A carry's note: the analyst's, and where the rows it was signed on were revised, that it was carried over
    them on purpose — so the ledger, show and the report tell such a carry from a clean one; then what else it
    was carried across (``due.carried_across``: the plan price it moved from, other CV settings)."""
    return "; ".join([part for part in (note, REVISED_NOTE if revised else "") if part] + list(across))


def across_words(across: Counter) -> str:
    """The summary's clause for what the carries written were carried across: "; 16 of them to a new plan price;
    79 fitted with other settings than signed: folds 5 → 10, rule one-se → lowest" (each change with its count
    where they differ)."""
    from fitcore.ledger.due import NEW_PRICE, OTHER_SETTINGS
    out = ""
    moved = sum(count for said, count in across.items() if said.startswith(NEW_PRICE))
    if moved:
        out += f"; {moved:,} of them {NEW_PRICE}"
    settings = Counter({said[len(OTHER_SETTINGS) + 2:]: count for said, count in across.items()
                        if said.startswith(OTHER_SETTINGS)})
    if settings:
        which = (next(iter(settings)) if len(settings) == 1 else
                 " · ".join(f"{said} ({count:,})" for said, count in settings.most_common()))
        out += f"; {sum(settings.values()):,} {OTHER_SETTINGS}: {which}"
    return out
