"""One row of the hostile-input corpus, and the inputs many rows share (see ``cases.py``)."""
from __future__ import annotations

from typing import NamedTuple


class Case(NamedTuple):
    id: str
    command: str
    files: dict
    code: int
    says: str | None
    replaces: tuple = ()
    checks: tuple = ()
    how: str = "in-process"  # or "subprocess", or "nobody" (a subprocess as an unprivileged user)


D = {"d.csv": "good"}
R = {"d.csv": "good", "r.json": "fit:d.csv"}
RL = {"d.csv": "good", "r.json": "fit:d.csv", "L.jsonl": "ledger:r.json"}
PAIR = {"d.csv": "rejects", "r.json": "fit:d.csv"}  # an earlier results file and its rejects file
F = "fit d.csv -o r.json --quiet"
