"""A series' status, derived by replaying the ledger (a pure function of its records)."""
from __future__ import annotations

import json
from dataclasses import dataclass, field

STATUS_OF = {"accept": "accepted", "override": "overridden", "hold": "held"}


def series_id(key: dict) -> str:
    """A stable text identity for a series key (canonical JSON)."""
    return json.dumps(key, sort_keys=True, ensure_ascii=False, separators=(",", ":"))


@dataclass
class SeriesHistory:
    """What the ledger says about one series: every record, and the decisions still standing."""

    records: list[dict] = field(default_factory=list)
    standing: list[dict] = field(default_factory=list)

    @property
    def current(self) -> dict | None:
        return self.standing[-1] if self.standing else None

    def status(self, fingerprint: str | None = None) -> str:
        """pending, accepted, overridden, held — or stale when the data changed since the decision."""
        current = self.current
        if current is None:
            return "pending"
        if fingerprint is not None and current.get("fingerprint") != fingerprint:
            return "stale"
        return STATUS_OF[current["action"]]


def replay(records: list[dict]) -> dict[str, SeriesHistory]:
    """series id → history.  The latest standing decision wins; ``revoke`` withdraws the
    revoking analyst's own latest standing decision on that series; ``note`` changes nothing."""
    return apply({}, records)


def apply(histories: dict[str, SeriesHistory], records: list[dict]) -> dict[str, SeriesHistory]:
    """Replay further ``records`` onto ``histories`` (in place); returns it."""
    for record in records:
        history = histories.setdefault(series_id(record["series"]), SeriesHistory())
        history.records.append(record)
        action = record["action"]
        if action in STATUS_OF:
            history.standing.append(record)
        elif action == "revoke":
            mine = [i for i, r in enumerate(history.standing) if r["analyst"] == record["analyst"]]
            if mine:
                history.standing.pop(mine[-1])
    return histories


def own_standing(history: SeriesHistory | None, analyst: str) -> dict | None:
    """The analyst's latest decision still standing on a series (what ``revoke`` would withdraw)."""
    if history is None:
        return None
    mine = [r for r in history.standing if r["analyst"] == analyst]
    return mine[-1] if mine else None
