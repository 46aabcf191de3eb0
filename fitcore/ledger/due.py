"""What a series signed on other data is due, from its backtest: the statuses a backtest ends in, the one rule by
which ``ledger carry`` carries or leaves a series (``left_for_human``) and the words ``show --ledger``, the screen
and carry's counts say it in (``due``, ``untested_due``, ``changed_since_fit``, ``revoked_due``), and what a carry
is carried across besides new rows (``carried_across``).  The backtest itself, over every series at once:
``backtest``.
"""
from __future__ import annotations

import math

# status of a series' backtest; None: no standing decision made on other data (nothing to test)
PASSED, FAILED = "passed", "failed"
NO_DATES, NO_NEW_ROWS, UNSIGNED, UNDATED = "no-dates", "no-new-rows", "unsigned", "undated"
# signed with other controls than this fit holds fixed (added, dropped, other season terms): the curves
# are not the same model, whatever the backtest says, so an analyst looks again
CONTROLS_CHANGED = "controls-changed"
# signed with other weights than this fit's (added, dropped, another column): likewise another model
WEIGHTS_CHANGED = "weights-changed"
# the rows up to the signed data's last date are not the signed ones and the signed curve no longer fits them
HISTORY_CHANGED = "history-changed"


# What a series signed on other data needs when its backtest did not pass, in the words carry counts by.
UNTESTED = {FAILED: "backtest failed", CONTROLS_CHANGED: "controls changed since signing",
            WEIGHTS_CHANGED: "weighting changed since signing",
            HISTORY_CHANGED: "history changed since signing", NO_DATES: "no dates",
            UNDATED: "no dates", NO_NEW_ROWS: "no new rows", UNSIGNED: "no signed model"}


REVISED_DUE = "history revised since signing"
BEYOND_DUE = "plan beyond signed prices"


def beyond_signed(price, planned, lo, hi) -> bool:
    """Whether this plan's ``price`` lies outside the prices a signed curve was fitted over (``lo``, ``hi``: the
    backtest's ``signed_price_lo``/``hi``; None or NaN in results written before them: not judged).  Carrying
    the decision there would sign a price no one saw the curve at (a trial: a plan moved 2.20 → 3.30 past
    signed prices 1.61–2.73 was carried, said only in the backtest's sentence)."""
    if not planned or price is None or lo is None or hi is None:
        return False
    from ..fit.basis import outside_prices
    price, lo, hi = float(price), float(lo), float(hi)
    return bool(math.isfinite(lo) and math.isfinite(hi) and outside_prices(price, lo, hi))


# an override's curve no longer fitted here, or beyond one SE of the lowest CV error: not carried
OVERRIDE_FAR = "override not within one SE"


def left_for_human(status: str, shifted: bool, stops, has_model: bool, shape_changed: bool,
                   kept_override: bool | None = None, revised: bool = False, revised_ok: bool = False,
                   beyond: bool = False) -> str | None:
    """Why a series whose standing decision was made on other data is not carried to them (None: ``ledger
    carry`` carries it), the first that holds: its backtest did not pass, the rows it was signed on were
    ``revised`` (unless ``revised_ok``: ``ledger carry --carry-revised``, for a rolling window — rows restated
    or re-dated could pass for rows since), ``shifted``, a stop flag (``stops``: its stop flags' codes, or a
    bool — of the curve a carry would make stand, an override's own: ``candidate_checks.carried_codes``), this
    plan's price beyond the prices the curve was signed on (``beyond``: ``beyond_signed``), no curve proposed
    (``has_model``), or the signed shape is not this cycle's proposal (``shape_changed``) —
    unless the decision carried is an override whose curve is still available and within one SE of the lowest
    CV error (``kept_override``: True; False for an override that is not, said as such — its shape was never the
    proposal —; None where the decision carried is no override).  The one rule: carry counts by it, ``show
    --ledger`` and the screen say it as what is due (``due``)."""
    if status != PASSED:
        return UNTESTED.get(status, status)
    if revised and not revised_ok:
        return REVISED_DUE
    if shifted:
        return "shifted"
    if stops:
        return "stop flag"
    if beyond:
        return BEYOND_DUE
    if not has_model:
        return "no candidate"
    if shape_changed and not kept_override:
        return "proposal changed" if kept_override is None else OVERRIDE_FAR
    return None


def due(record: dict | None, stops=(), has_model: bool = True, kept_override: bool | None = None) -> str | None:
    """What a signed series whose data changed needs, in a few words, from its stored backtest (None:
    nothing was tested: no decision, or one on this very data): why carry leaves it (``left_for_human``,
    a stop flag with its codes), else "backtest passed"."""
    if record is None:
        return None
    why = left_for_human(record["status"], bool(record.get("shifted")), stops, has_model,
                         bool(record.get("shape_changed")), kept_override, bool(record.get("revised")),
                         beyond=beyond_signed(record.get("price"), record.get("planned"),
                                              record.get("signed_price_lo"), record.get("signed_price_hi")))
    if why == "stop flag" and not isinstance(stops, bool):
        why = f"stop flag ({', '.join(stops)})"
    return why or "backtest passed"


HELD_DUE = "a new look (a hold has no curve to backtest)"
HELD_DUE_SHORT = "new look (held)"


def untested_due(decision: dict | None, short: bool = False) -> str | None:
    """What a series needs whose standing decision on other data has no backtest because of what it is: a
    hold signs no curve, so there is nothing to test, whatever the results hold (None: any other decision,
    whose missing backtest the caller explains)."""
    if decision is None or decision["action"] != "hold":
        return None
    return HELD_DUE_SHORT if short else HELD_DUE


CHANGED_DUE = "changed since the fit: fit again with --ledger"
CHANGED_DUE_SHORT = "changed since the fit"


def changed_since_fit(tested: dict | None, history) -> bool:
    """Whether the ledger moved on for a stale series since results fitted with ``--ledger`` on it read it:
    the series' latest record now (``history``: its ``SeriesHistory``) is not the one their backtest of it read
    (``tested``'s ``latest``: a revoke, a note or a decision since, which carry would not supersede), or they
    tested nothing (``tested`` None: pending or held at the fit, decided since).  Those results cannot say what
    is due: ``show --ledger`` and the screen say ``CHANGED_DUE``, carry counts it under ``CHANGED_DUE_SHORT``.
    A hold and a decision on newer data keep their own words: callers ask those first."""
    if history is None or history.current is None:
        return False
    return tested is None or tested.get("latest") != history.latest["digest"]


REVOKED_DUE_SHORT = "revoked"


def recorded_due(history, newer, tested: dict | None = None, fitted: bool = False, short: bool = False) -> str | None:
    """What a stale series is due by its ledger records alone, whatever a backtest finds — the first that holds:
    the decision standing on it was made on newer data than the rows shown (``newer()``, asked only here:
    ``rules.decided_on_newer``), it is a hold (``untested_due``), the ledger moved on for it since results fitted
    with ``--ledger`` on this ledger read it (``fitted``; ``tested``: their backtest of the series, or None;
    ``changed_since_fit``), or what stands is what a revoke left (``revoked_due``).  None: its backtest says
    (``due``).  ``show --ledger``, the screen, the report and carry's counts ask it in this order (``short``:
    a list's column, carry's count)."""
    from .rules import NEWER_DUE, NEWER_DUE_SHORT
    if newer():
        return NEWER_DUE_SHORT if short else NEWER_DUE
    held = untested_due(history.current, short)
    if held is not None:
        return held
    if fitted and changed_since_fit(tested, history):
        return CHANGED_DUE_SHORT if short else CHANGED_DUE
    return revoked_due(history, short)


def revoked_due(history, short: bool = False) -> str | None:
    """What a stale series is due where a decision on it was revoked and no decision has been recorded since
    (``history``: its ``SeriesHistory``; ``SeriesHistory.revoked``): a person withdrew what stood, so what stands
    again is a fallback, not a sign-off to carry — 'revoked by bo (root) at 2026-12-05 14:02 UTC: "want a fresh
    look"' (``short``: ``REVOKED_DUE_SHORT``, a list's column and carry's count).  Asked after
    ``changed_since_fit`` (a revoke the fit never read is that); None where no such revoke stands."""
    revoke = history.revoked if history is not None else None
    if revoke is None:
        return None
    if short:
        return REVOKED_DUE_SHORT
    from ..text import clean
    from .rules import person
    note = clean(str(revoke.get("note") or "")).strip()
    said = f"{REVOKED_DUE_SHORT} by {person(revoke)} at {clean(str(revoke['at'])[:16].replace('T', ' '))} UTC"
    return said + (f': "{note}"' if note else "")


def carried_across(bt: dict) -> list[str]:
    """What a signed curve is carried across besides new rows, from its stored backtest: another plan price than
    signed ("to a new plan price: 2.28 → 2.05"), other CV settings ("fitted with other settings than signed:
    folds 5 → 10, rule one-se → lowest").  Said by carry (its summary and each carry's note) and ``show``."""
    from ..review.formats import money
    out = []
    signed, price = (math.nan if bt.get(name) is None else float(bt[name]) for name in ("signed_price", "price"))
    if bt.get("planned") and math.isfinite(signed) and math.isfinite(price) and not math.isclose(signed, price,
                                                                                                  rel_tol=1e-12):
        out.append(f"{NEW_PRICE}: {money(signed)} → {money(price)}")
    if bt.get("settings_changed"):
        out.append(f"{OTHER_SETTINGS}: {bt['settings_changed']}")
    return out


NEW_PRICE = "to a new plan price"
OTHER_SETTINGS = "fitted with other settings than signed"
