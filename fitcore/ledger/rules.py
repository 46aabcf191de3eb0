"""The rules every append obeys, checked under the exclusive lock against what the ledger holds
then (so no path — screen, command, script — can skip them).  Pure: histories in, error out.

- an override needs a note and a model, a note record its text (``records.check_entry``);
- an accept whose ``flags`` include a stop flag (other than ``stale``) or ``shifted`` (the signed curve failed
  its backtest, its history changed, or the proposal moved far from it) needs a note;
- an accept on a series whose standing decision is already an accept (or a carry of one) of the
  same model on the same data fingerprint is refused: there is nothing to add (results fitted otherwise
  on the same data may propose another model: accepting that one is a change of model);
- ``revoke`` withdraws one's own standing decision — a /2 decision only by the OS user who made
  it, a /1 decision by its display name — and is refused when there is none;
- ``supersedes`` must still be the series' latest record (else ``LedgerConflict``);
- at most one standing ``carry`` per series and data fingerprint, and it must name an accept or override of that
  series;
- no ``carry`` on a series whose latest record but notes is a revoke (``SeriesHistory.revoked``): what a revoke
  leaves standing is a fallback, which waits for a person's accept, override or hold before it is carried;
- one append holds at most one record per series (a second could not name the first's digest);
- an accept, override, hold or carry on data older than those the standing decision was made on is
  refused (``newer_standing``): an analyst on last cycle's results cannot replace this cycle's sign-off.
"""
from __future__ import annotations

from ..text import clean
from .records import Entry, Identity, LedgerConflict, LedgerError, check_entry
from .replay import SeriesHistory, own_standing, series_id

DONE = {"accept": "accepted {model}", "override": "overrode the proposal with {model}", "hold": "held",
        "note": "added a note", "revoke": "withdrew a decision", "carry": "carried {model} forward"}


def check_alone(entries: list[Entry]) -> list[bytes | None]:
    """The rules an append's entries must meet whatever the ledger holds (checked before the
    file is even opened, so a refused first decision leaves no file behind).  Returns each entry's
    signed model as canonical bytes (``check_entry``)."""
    stops = explained_codes()
    seen: set[str] = set()
    signed = []
    for entry in entries:
        signed.append(check_entry(entry))
        sid = series_id(entry.series)
        if sid in seen:
            raise LedgerError(f"{label(entry.series)}: one append records at most one decision per series")
        seen.add(sid)
        flagged = [code for code in entry.flags if code in stops]
        if entry.action == "accept" and flagged and not entry.note.strip():
            stop = [code for code in flagged if code != "shifted"]
            past = [f"a stop flag ({', '.join(stop)})"] * bool(stop) + ["the shifted flag"] * (len(stop) < len(flagged))
            raise LedgerError(f"{label(entry.series)}: accepting past {' and '.join(past)} needs a note saying why")
    return signed


def check_against(entries: list[Entry], histories: dict[str, SeriesHistory], who: Identity) -> None:
    """The rules that depend on what the ledger holds now (under the lock).  Raises ``LedgerError``
    (``LedgerConflict`` for a stale ``supersedes``) for the first entry it must refuse."""
    for entry in entries:
        history = histories.get(series_id(entry.series))
        check_latest(entry.series, entry.supersedes, history)
        _check_action(entry, history, who)
        newer = newer_standing(entry, history)
        if newer is not None:
            raise LedgerError(f"{label(entry.series)}: {newer}; open the newer results to decide it")


def check_latest(series: dict, supersedes: str | None, history: SeriesHistory | None) -> None:
    """The rule "the record the decider saw (``supersedes``: its digest, None for none) is still the series'
    latest": ``LedgerConflict`` naming what happened since.  The ledger applies it under its lock; a screen
    may ask first, in the same words."""
    latest = history.latest if history else None
    if supersedes != (latest["digest"] if latest else None):
        raise LedgerConflict(f"{what_happened(latest)}; look again" if latest else
                             f"{label(series)}: the record this decision follows is not in the ledger; look again",
                             latest)


def _check_action(entry: Entry, history: SeriesHistory | None, who: Identity) -> None:
    current = history.current if history else None
    if entry.action == "accept":
        # an accept (or an accept carried) of the same model on the same data: nothing to add; an override
        # carried, or an accept of another fit's proposal, may be replaced by the proposal like any override
        if current and (history.decision or current)["action"] == "accept" and \
                current["fingerprint"] == entry.fingerprint and current.get("model") == entry.model:
            raise LedgerError(f"{label(entry.series)}: already accepted on this data "
                              f"({what_happened(current)}); nothing to add")
    elif entry.action == "revoke" and own_standing(history, who.analyst, who.os_user) is None:
        whose = f"; the standing decision is {person(current)}'s" if current else ""
        raise LedgerError(f"{label(entry.series)}: no decision of yours ({clean(who.os_user)}) stands "
                          f"to withdraw{whose}")
    elif entry.action == "carry":
        records = history.records if history else []
        standing = history.standing if history else []  # a carry withdrawn since does not count
        done = next((r for r in standing if r["action"] == "carry" and r["fingerprint"] == entry.fingerprint), None)
        if done is not None:
            raise LedgerError(f"{label(entry.series)}: already carried to this data ({what_happened(done)})")
        revoke = history.revoked if history else None
        if revoke is not None:
            raise LedgerError(f"{label(entry.series)}: {what_happened(revoke)} and nobody has decided it since: what "
                              "stands again is for a person to accept, override or hold, not to carry")
        if not any(r["digest"] == entry.carries and r["action"] in ("accept", "override") for r in records):
            raise LedgerError(f"{label(entry.series)}: a carry must name an accept or override of this series; "
                              f"{entry.carries[:12]}… is not one")


DECIDING = ("accept", "override", "hold", "carry")  # what the newer-data rule guards (not a note or revoke)


def newer_standing(entry: Entry, history: SeriesHistory | None) -> str | None:
    """Why the decision standing on the series was made on newer data than ``entry``'s (None: it was not).

    Newer means: its rows end later — the last dates the signed models and holds record (``signed.last_date``
    or a hold's ``last_date``, of any record on those data; else ``entry.last_date``) —, or, where neither
    side has a date or both the same (no date column, corrected rows), its data were first decided on later
    in the series' history than the entry's.  Where only one side has a date nothing tells (a hold recorded
    before holds kept theirs): not refused.  Data the ledger has never seen are not older than anything.
    Only accept, override, hold and carry are judged; a note and a revoke change no decision on other data."""
    current = history.current if history is not None else None
    if current is None or entry.action not in DECIDING or current["fingerprint"] == entry.fingerprint:
        return None
    dates: dict[str, str] = {}
    first: dict[str, int] = {}
    for index, record in enumerate(history.records):
        first.setdefault(record["fingerprint"], index)
        signed = record.get("signed")
        day = signed.get("last_date") if isinstance(signed, dict) else record.get("last_date")
        if isinstance(day, str):
            dates.setdefault(record["fingerprint"], day)
    signed = entry.signed if isinstance(entry.signed, dict) else {}
    mine = signed.get("last_date") if isinstance(signed.get("last_date"), str) else None
    mine = mine or entry.last_date or dates.get(entry.fingerprint)
    theirs = dates.get(current["fingerprint"])
    done = what_happened(current)
    if mine and theirs and mine != theirs:
        return (f"{done} on newer data (rows to {clean(theirs)}; the rows shown end {clean(mine)})"
                if theirs > mine else None)
    if bool(mine) != bool(theirs):  # one side dated, the other not: the order below could lock the newer out
        return None
    if entry.fingerprint in first and first[entry.fingerprint] < first[current["fingerprint"]]:
        return f"{done} on newer data (decided on after the data shown)"
    return None


# What a series is due where the decision standing on it was made on newer data than the rows shown: the
# screen, ``show --ledger`` and ``carry``'s count say it in these words (``SHORT``: a list's column, carry's count).
NEWER_DUE = "decided on newer data: open the newer results"
NEWER_DUE_SHORT = "decided on newer data"


def decided_on_newer(series: dict, fingerprint: str, last_date: str | None,
                     history: SeriesHistory | None) -> str | None:
    """``newer_standing``'s clause for a decision on these rows (``fingerprint``, ending ``last_date``), or None:
    whether the ledger would refuse any accept, override or hold here for a decision made on newer data."""
    probe = Entry(series=series, action="hold", fingerprint=fingerprint, results="", last_date=last_date)
    return newer_standing(probe, history)


def what_happened(record: dict, dated: bool = False) -> str:
    """One clause for a record: "ana accepted poly1 at 14:02:11 UTC" (``dated``: "… at 14:02:11 UTC on 2026-12-05",
    for a record that may be days old)."""
    done = DONE.get(record["action"], record["action"]).format(model=clean(str(record.get("model"))))
    at = record["at"][11:19] if len(record["at"]) >= 19 else record["at"]
    day = f" on {clean(record['at'][:10])}" if dated and len(record["at"]) >= 19 else ""
    return f"{person(record)} {done} at {clean(at)} UTC{day}"


def what_stands(standing: dict, decision: dict | None, dated: bool = False) -> str:
    """``what_happened`` of a standing record; for a carry, also the accept or override it carries (``decision``),
    as the report says it: "bo carried poly1 forward at 06:26:07 UTC (carries accept by ana, 2026-12-03 18:54
    UTC)" — the carry is who refitted it, the decision who chose the curve."""
    said = what_happened(standing, dated)
    if standing["action"] != "carry" or decision is None or decision is standing:
        return said
    at = clean(decision["at"][:16].replace("T", " "))
    return f"{said} (carries {decision['action']} by {person(decision)}, {at} UTC)"


def label(key: dict) -> str:
    return clean(" · ".join(str(value) for value in key.values()))


def person(record: dict) -> str:
    """Who made a record: the display name, and the OS user beside it where they differ (``ana (root)``)."""
    name, user = clean(record["analyst"]), clean(record.get("os_user") or "")
    return name if not user or user == name else f"{name} ({user})"


def explained_codes() -> set[str]:
    """The flags an accept must say why it goes past: every stop flag but ``stale`` (it comes from the ledger
    itself, not the results: a stale series is re-signed normally), and ``shifted`` (a signed curve that no
    longer holds, or a proposal far from it: an approver reading the ledger needs the reason)."""
    from ..review.flags import SEVERITY  # numpy and the fit: only appends pay for the import
    return {code for code, severity in SEVERITY.items() if severity == "stop"} - {"stale"} | {"shifted"}
