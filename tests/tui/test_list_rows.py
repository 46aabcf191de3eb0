"""The list at 80 columns says what it must: a look-alike's '≈' mark gives way before any stop flag does, a stale
series' flags, this cycle's proposal's, are said to be of that proposal where the model listed is the one signed
on other data, and ']' says when it goes round to the first series needing attention."""
from __future__ import annotations

import csv
import random
from datetime import date, timedelta
from pathlib import Path

import numpy as np
import pytest

from fitcore import ledger
from fitcore.data.columns import Columns
from tui.factory import Source
from tui.screens.dialogs import TextDialog

from .conftest import box_words, make_app, screen_text, started, until
from .test_dialog_answers_shown import renamed
from .test_key_columns_screen import SAMPLE, signed_by_region


async def test_a_look_alikes_mark_leaves_its_stop_flags_whole_at_80_columns(ledger_path, tmp_path):
    """At 80 columns '≈' and the ledger's long spelling took the whole flags column: the row read '…  ≈flat line
    thing …', its '!flat-price' gone (whole at 200 columns).  The mark's name is cut first."""
    name = "table salt from the coast 1 kg"
    ledger.append(ledger_path, [ledger.Entry(series={"product": name, "region": "North"}, action="hold",
                                             fingerprint="f" * 64, results="ab" * 32)], ledger.Identity("bo", "bo", "h"))
    source = Source(data=renamed(tmp_path, name.capitalize(), product="table salt 1 kg"),
                    columns=Columns(segments=("region",), date="week"))
    app = make_app(ledger_path, source)
    async with app.run_test(size=(80, 24)) as pilot:
        await started(app, pilot)
        [row] = [line for line in screen_text(app).splitlines() if line.startswith("· Table salt")]
        assert "≈ta…" in row and "!flat-price +1" in row, row


def next_cycle(folder: Path) -> Source:
    """The sample and twelve weeks more of every series (rows of its own drawn again at 0.6–1.4 times their
    volume): every series signed on the sample reads stale, and some get another proposal."""
    rng = random.Random(3)
    with open(SAMPLE / "wholesale.csv", newline="") as src:
        rows = list(csv.DictReader(src))
    last = max(date.fromisoformat(row["week"]) for row in rows)
    series: dict[tuple, list[dict]] = {}
    for row in rows:
        series.setdefault((row["product"], row["region"]), []).append(row)
    for own in series.values():
        for k in range(1, 13):
            row = dict(rng.choice(own))
            rows.append({**row, "week": (last + timedelta(days=7 * k)).isoformat(),
                         "volume": str(max(0, round(float(row["volume"]) * (0.6 + 0.8 * rng.random()))))})
    with open(folder / "next.csv", "w", newline="") as out:
        write = csv.DictWriter(out, rows[0].keys())
        write.writeheader()
        write.writerows(rows)
    return Source(data=folder / "next.csv", columns=Columns(segments=("region",), date="week"))


async def test_a_stale_rows_flags_are_said_to_be_the_proposals_and_its_accept_says_what_it_replaces(ledger_path,
                                                                                                    tmp_path):
    """A trial's row read '! carrots 1 kg · North 105 loglog 47% !rising !stale': the signed loglog's model and
    score beside this cycle's poly5's flag, and 'a' asked 'Accept poly5 … despite rising?' without saying it
    replaces the loglog signed on other data.  The row says 'proposes poly5', as `show --ledger` does, and the
    accept's note box (and the message after it) what it replaces."""
    signed_by_region(ledger_path)
    app = make_app(ledger_path, next_cycle(tmp_path))
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        session = await started(app, pilot)
        names = session.results.names
        stale = [int(s) for s in session.view if session.status[int(s)] == "stale"]
        other = [s for s in stale if session.listed_model(s)[0] != names[int(session.results.chosen[s])]]
        assert other and len(other) < len(stale)  # some keep the signed model's shape
        s = next(s for s in other if session.needs_reason(session.look(s), "accept"))
        session.cursor = int((session.view == s).nonzero()[0][0])
        app.screen.refresh_all()
        await pilot.pause()
        proposal, signed = names[int(session.results.chosen[s])], session.listed_model(s)[0]
        [row] = [line for line in screen_text(app).splitlines() if line.startswith("! " + session.label(s))]
        assert f" {signed} " in row and f"proposes {proposal} !stale" in row, row
        same = next(s for s in stale if s not in other)  # a stale row whose proposal is the model signed: no lead
        assert session.listed_model(same)[0] == names[int(session.results.chosen[same])]
        await pilot.press("a")
        await until(pilot, lambda: isinstance(app.screen, TextDialog))
        words = box_words(app)
        who = session.decision(s)["analyst"]  # accept-unflagged's: the OS user's
        assert f"This replaces what stands: {who} accepted {signed} at" in words, words
        assert "on other data than these (the series reads stale)" in words, words
        await pilot.press(*"seen", "enter")
        await until(pilot, lambda: not isinstance(app.screen, TextDialog))
        await until(pilot, lambda: f"in place of {who} accepted {signed}" in " ".join(screen_text(app).split()))


def test_show_ledger_says_the_same_of_a_stale_rows_flags(ledger_path, tmp_path, capsys):
    """`show --ledger`, whose model column the screen's follows, listed 'loglog … stale … weak-fit shifted' with
    no word that weak-fit was this cycle's poly0's."""
    from pricefold.cli import main
    signed_by_region(ledger_path)
    out = tmp_path / "next.parquet"
    assert main(["fit", str(next_cycle(tmp_path).data), "--segment", "region", "--date", "week", "-o", str(out),
                 "-q"]) == 0
    capsys.readouterr()
    assert main(["show", str(out), "--ledger", str(ledger_path)]) == 0
    rows = [line.split() for line in capsys.readouterr().out.splitlines()[1:] if " stale " in line]
    leads = [row for row in rows if "proposes" in row]
    assert leads and len(leads) < len(rows)
    for row in leads:
        at = row.index("proposes")
        assert row[at + 1].rstrip(":") != row[row.index("stale") - 1].rstrip("↺")  # the proposal is another model


@pytest.mark.parametrize("key, start, said", [("right_square_bracket", -1, "Back to the first series needing attention"),
                                              ("left_square_bracket", 0, "Back to the last series needing attention")])
async def test_the_attention_jump_says_when_it_goes_round(ledger_path, key, start, said):
    """']' on the last series needing attention went to the first without a word."""
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        session = await started(app, pilot)
        positions = np.flatnonzero(session.needs_attention()[session.view])
        session.cursor = int(positions[start])
        app.screen.refresh_all()
        await pilot.pause()
        await pilot.press(key)
        await until(pilot, lambda: said in screen_text(app))
        assert session.cursor == int(positions[-1 - start])
        await pilot.press(key)  # an ordinary step says nothing more
        await pilot.pause()
        assert session.cursor == int(positions[1 if start == -1 else -2])


async def test_the_key_line_keeps_help_and_quit_at_60_columns(ledger_path):
    """At 60 columns the key line lost '? help  q quit' once 'u revoke' came in after a decision."""
    app = make_app(ledger_path)
    async with app.run_test(size=(60, 20)) as pilot:
        await started(app, pilot)
        await pilot.press("h")
        await until(pilot, lambda: isinstance(app.screen, TextDialog))
        await pilot.press("enter")
        await until(pilot, lambda: "u revoke" in screen_text(app).splitlines()[-1])
        keys = screen_text(app).splitlines()[-1]
        assert "? help" in keys and "q quit" in keys and keys.startswith(" a accept"), keys
