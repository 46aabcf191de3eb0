"""Two analysts on one results file and one ledger, each with a triage screen of their own."""
from __future__ import annotations

import json

from fitcore.ledger import Identity
from tests.tui.conftest import make_app, screen_text, started, until

BO = Identity("bo", "bo", "other-host")


def records(path):
    return [json.loads(line) for line in path.read_text().splitlines()] if path.exists() else []


def put_cursor_on(app, label: str) -> int:
    session = app.session
    position = next(i for i, s in enumerate(session.view) if session.label(int(s)) == label)
    session.cursor = position
    app.screen.refresh_all()
    return int(session.view[position])


async def test_a_decision_lands_on_the_series_on_screen_after_the_other_decided_it(ledger_path):
    """Issue case 1: both on 'table salt 1 kg · North'; ana accepts; bo's list reloads; bo presses a."""
    ana, bo = make_app(ledger_path), make_app(ledger_path, who=BO)
    async with ana.run_test(size=(80, 24)) as pa, bo.run_test(size=(80, 24)) as pb:
        await started(ana, pa)
        await started(bo, pb)
        salt = "table salt 1 kg · North"
        put_cursor_on(ana, salt)
        s = put_cursor_on(bo, salt)
        await pa.pause()
        await pb.pause()
        await pa.press("a")
        await pa.pause()
        await pa.press(*"checked", "enter")  # stop flags: a note comes first
        await pa.pause()
        assert [r["analyst"] for r in records(ledger_path)] == ["ana"]
        await until(pb, lambda: bo.session.status[s] == "accepted")  # bo's screen looks every 2 s
        await pb.pause()
        await pb.press("a")
        await pb.pause()
        await pb.press(*"looks fine", "enter")
        await pb.pause()
        written = records(ledger_path)
        assert all(r["series"] == {"product": "table salt 1 kg", "region": "North"} for r in written), written
        assert bo.session.current == s  # still on the series bo was looking at
        assert "ana accepted poly0" in screen_text(bo)
