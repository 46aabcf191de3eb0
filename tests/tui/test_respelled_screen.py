"""The screen where some of the results' series look like the ledger's under another spelling
(``fitcore.ledger.respelling``): the header and help say how many, the row marks each (≈ and the ledger's
spelling), the evidence names the ledger series it looks like, and the first decision on such a series asks first
(default "No"), again under the writer's lock where another analyst's record brings a look-alike.

The ledger is the sample's (``accept-unflagged`` of the shipped results: series keyed by product and region); the
results are the sample with the North series of a few products lower-cased, one South series with a trailing
space, and a new product.
"""
from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import pytest
from rich.console import Console

from fitcore import ledger
from fitcore.data.columns import Columns
from tui.factory import Source
from tui.screens.dialogs import ChoiceDialog, MessageDialog, TextDialog
from tui.session import Refused

from .conftest import ANA, make_app, on_series, screen_text, until
from .test_key_columns_screen import BO, SAMPLE, signed_by_region

NEW_PRODUCT = "quinces 1 kg"


def words(app) -> str:
    return " ".join(screen_text(app).split())


def respelled_source(folder: Path) -> Source:
    """The sample with 'north' for the North series of products before 'c', 'South ' for lemons' South series, and
    a new product (a copy of pears' rows)."""
    with open(SAMPLE / "wholesale.csv", newline="") as src, open(folder / "next.csv", "w", newline="") as out:
        rows = csv.DictReader(src)
        write = csv.DictWriter(out, rows.fieldnames)
        write.writeheader()
        for row in rows:
            if row["region"] == "North" and row["product"] < "c":
                row = {**row, "region": "north"}
            elif row["region"] == "South" and row["product"] == "lemons 500 g":
                row = {**row, "region": "South "}
            write.writerow(row)
            if row["product"] == "pears 1 kg":
                write.writerow({**row, "product": NEW_PRODUCT})
    return Source(data=folder / "next.csv", columns=Columns(segments=("region",), date="week"))


def respelled_in_ledger(path: Path) -> list[dict]:
    """The ledger's series that the results spell otherwise (plain arithmetic on the keys, not the rule)."""
    keys = [json.loads(line)["series"] for line in path.read_text().splitlines()]
    return [k for k in keys if (k["region"] == "North" and k["product"] < "c")
            or (k["region"] == "South" and k["product"] == "lemons 500 g")]


def records(path: Path) -> int:
    return len(path.read_text().splitlines())


async def test_respelled_series_are_said_marked_and_asked_before_their_first_decision(ledger_path, tmp_path):
    """Before: the header said nothing, the row read as any pending series, and 'h' went straight to the note box
    (a new series beside the ledger's, silently)."""
    signed_by_region(ledger_path)
    alike = respelled_in_ledger(ledger_path)
    assert len(alike) >= 4
    count, before = len(alike), ledger_path.read_bytes()
    app = make_app(ledger_path, respelled_source(tmp_path))
    async with app.run_test(size=(120, 34)) as pilot:
        target = next(k for k in alike if k["region"] == "North")
        s = await on_series(app, pilot, {"product": target["product"], "region": "north"})
        session = app.session
        clause = (f"Spelled otherwise (≈ in the list): {count} series in these results look like series in ledger.jsonl "
                  'under another spelling (region "north" for "North", …); a decision on one asks first')
        assert clause in words(app)
        label = f"{target['product']} · north"
        row = next(line for line in screen_text(app).splitlines() if line.find(label) in (2, 3))  # the list's row
        assert "≈North" in row
        evidence = app.screen.evidence
        await until(pilot, lambda: evidence.series == s and not evidence.has_class("catching-up"))
        said = " ".join(str(evidence.query_one("#ev-flags").render()).split())  # the evidence's words, above the flags
        assert said.startswith(f"≈ Spelled otherwise: {label} looks like {target['product']} · North in ledger.jsonl "
                               'under another spelling (region "north" for "North"), a series these results do not hold '
                               f"({ledger.Ledger(ledger_path).records[0]['analyst']} accepted ")
        await pilot.press("question_mark")
        await until(pilot, lambda: isinstance(app.screen, MessageDialog))
        console = Console(width=300, record=True, file=io.StringIO())
        console.print(app.screen.body)
        assert f"intact\n  {clause}" in console.export_text()
        await pilot.press("escape")
        for cancel in (("escape",), ("enter",)):  # Esc, or Enter on "No" (where the dialog opens)
            await pilot.press("h")
            await until(pilot, lambda: isinstance(app.screen, ChoiceDialog))
            assert "Yes: record it as a new series" in words(app) and "whose decisions stay where they are" in words(app)
            await pilot.press(*cancel)
            await until(pilot, lambda: not isinstance(app.screen, ChoiceDialog))
            assert not isinstance(app.screen, TextDialog) and ledger_path.read_bytes() == before
        await pilot.press("h")
        await until(pilot, lambda: isinstance(app.screen, ChoiceDialog))
        await pilot.press("up", "enter")  # Yes
        await until(pilot, lambda: isinstance(app.screen, TextDialog))
        await pilot.press("enter")  # a hold needs no note
        await until(pilot, lambda: records(ledger_path) == records_before(before) + 1)  # the hold
        assert json.loads(ledger_path.read_text().splitlines()[-1])["series"]["region"] == "north"
        await until(pilot, lambda: f"Spelled otherwise (≈ in the list): {count - 1} series" in words(app))
        assert session.spellings.like(s) is None  # in the ledger now: no longer new
        # the new product looks like nothing: its first decision goes straight to the note box
        new = await on_series(app, pilot, {"product": NEW_PRODUCT, "region": "East"})
        assert session.spellings.like(new) is None
        await pilot.press("h")
        await until(pilot, lambda: isinstance(app.screen, TextDialog))


def test_a_look_alike_appended_just_before_the_write_is_refused_under_the_lock(ledger_path, tmp_path):
    """ana's screen read the ledger; bo records a hold on 'Quinces 1 kg · East' (his data spelled it so) after her
    last look, before her write on 'quinces 1 kg · East': found under the writer's lock, her decision is refused and
    nothing is written; confirmed, it goes through."""
    from tui.factory import open_session
    signed_by_region(ledger_path)
    session = open_session(respelled_source(tmp_path), ledger_path, ANA)
    s = int(session.keys.indices_of([{"product": NEW_PRODUCT, "region": "East"}])[0])
    shown = session.look(s)
    assert not session.spellings.unconfirmed(s)
    ledger.append(ledger_path, [ledger.Entry(series={"product": "Quinces 1 kg", "region": "East"}, action="hold",
                                             fingerprint="f", results="ab" * 32)], BO)
    before = ledger_path.read_bytes()
    reload = session.reload_ledger
    session.reload_ledger = lambda **_: set()  # its look came just before bo's append
    with pytest.raises(Refused, match="looks like a series just recorded in ledger.jsonl .*confirm it first$"):
        session.decide(shown, "hold")
    assert ledger_path.read_bytes() == before
    session.reload_ledger = reload
    session.reload_ledger(force=True)
    assert session.spellings.like(s) == ("Quinces 1 kg", "East")  # seen now: the screen says it, and asks
    session.spellings.confirm(s, session.spellings.unconfirmed(s))
    session.decide(session.look(s), "hold")
    assert records(ledger_path) == records_before(before) + 1


def records_before(data: bytes) -> int:
    return len(data.splitlines())


def test_look_alikes_need_attention_and_have_a_filter_and_missing_signed_series_are_said(ledger_path, tmp_path):
    """Before: a look-alike carrying no flag was hidden by the default filter ('needs attention'), ``f`` had no
    choice for the look-alikes, and nothing on the screen said that signed series of the ledger are not in these
    results."""
    from tui.factory import open_session
    signed_by_region(ledger_path)
    session = open_session(respelled_source(tmp_path), ledger_path, ANA)
    alike = set(session.spellings.found.results.tolist())
    assert len(alike) == len(respelled_in_ledger(ledger_path))
    unflagged = [s for s in alike if not session.diagnosis.raised[s].any()]
    assert unflagged  # the respelled series the ledger signed carried no flag: hidden before
    attention = session.needs_attention()
    assert all(attention[s] for s in alike)
    assert session.filter_counts()["spelled"] == len(alike)
    session.set_filter("spelled", None)
    assert set(session.view.tolist()) == alike
    # the ledger's respelled series are signed (accepted) and, spelled so, not in these results
    from tui.widgets.status_line import missing_text, status_text
    gone = len(respelled_in_ledger(ledger_path))
    header = status_text(session, 300).plain
    assert f"Not in these results: {gone} signed series of ledger.jsonl (" in header
    assert missing_text(session).startswith(f"{gone} signed series in ledger.jsonl are not in these results (")
    # each is a look-alike's ledger spelling: said so, as every command's note says it (before: a plain example)
    assert "(each present only under another spelling: " in missing_text(session)
    # another analyst's accept of a series these results lack counts as the ledger grows; a hold signs nothing
    for action, more in (("accept", 1), ("hold", 0)):
        key = {"product": f"elsewhere {action}", "region": "East"}
        ledger.append(ledger_path, [ledger.Entry(series=key, action=action, fingerprint="f", results="ab" * 32,
                                                 model="poly1" if action == "accept" else None)], BO)
        session.reload_ledger()
        gone += more
        assert f"Not in these results: {gone} signed series of ledger.jsonl (" in status_text(session, 300).plain
    alike_count = len(respelled_in_ledger(ledger_path))  # the example now the one held in no spelling
    assert (f"(elsewhere accept · East, …; {alike_count} of them present only under another spelling)"
            in missing_text(session))
    # and ``?`` names every one, a line each, with the spelling the results hold (before: the example alone)
    lines = missing_text(session).splitlines()[1:]
    assert len(lines) == gone and "    elsewhere accept · East" in lines
    assert sum(" — in these results as " in line for line in lines) == alike_count


async def test_a_look_alike_decided_meanwhile_is_refused_before_the_note_box(ledger_path, tmp_path):
    """ana presses 'h' on a look-alike and the dialog asks; meanwhile bo holds that very series; ana's "Yes" is
    refused at once, saying who decided (before: the hold's reason box opened, and the refusal came after it)."""
    signed_by_region(ledger_path)
    target = next(k for k in respelled_in_ledger(ledger_path) if k["region"] == "North")
    key = {"product": target["product"], "region": "north"}
    app = make_app(ledger_path, respelled_source(tmp_path))
    async with app.run_test(size=(100, 30)) as pilot:
        await on_series(app, pilot, key)
        await pilot.press("h")
        await until(pilot, lambda: isinstance(app.screen, ChoiceDialog))
        ledger.append(ledger_path, [ledger.Entry(series=key, action="hold", fingerprint="f", results="ab" * 32)], BO)
        before = ledger_path.read_bytes()
        await pilot.press("up", "enter")  # Yes
        await until(pilot, lambda: isinstance(app.screen, (MessageDialog, TextDialog)))
        assert isinstance(app.screen, MessageDialog)
        assert "Not recorded: bo held at " in words(app) and "look again" in words(app)
        assert ledger_path.read_bytes() == before


async def test_the_override_dialog_opens_on_where_the_series_is_after_the_question(ledger_path, tmp_path):
    """'o' on a look-alike asks first; results swapped meanwhile (a fit of the data in place of the file read)
    may hold the series elsewhere: the override dialog opens on where it is then (before: where it was when 'o'
    was pressed — another series' candidates under this one's title)."""
    from tui.screens.override import OverrideDialog
    signed_by_region(ledger_path)
    app = make_app(ledger_path, respelled_source(tmp_path))
    async with app.run_test(size=(120, 34)) as pilot:
        s = await on_series(app, pilot, {"product": "lemons 500 g", "region": "South "})
        session = app.session
        await pilot.press("o")
        await until(pilot, lambda: isinstance(app.screen, ChoiceDialog))
        moved = (s + 1) % session.results.n_series  # where a swap put it (the real lookup stands in for none here)
        session.index_of = lambda shown: moved
        session.check_shown = lambda shown, action: None  # its own tests: here the fake lookup would refuse
        await pilot.press("up", "enter")  # Yes
        await until(pilot, lambda: isinstance(app.screen, OverrideDialog))
        assert app.screen.s == moved


def test_a_decided_look_alike_reads_apart_from_the_signed_series_the_header_says_is_missing(ledger_path, tmp_path):
    """A trial: once a look-alike (``apples 1 kg `` with a trailing space) was decided as a new series, its row, title
    and a notification's words read ``apples 1 kg · North`` exactly as the header's note names the ledger's signed
    series missing from the results, and the note no longer said that one is present under another spelling."""
    from tui.factory import open_session
    from tui.widgets.status_line import missing_text
    signed_by_region(ledger_path)
    with open(SAMPLE / "wholesale.csv", newline="") as src, open(tmp_path / "spaced.csv", "w", newline="") as out:
        rows = csv.DictReader(src)
        write = csv.DictWriter(out, rows.fieldnames)
        write.writeheader()
        for row in rows:
            write.writerow({**row, "product": "apples 1 kg "} if row["product"] == "apples 1 kg" else row)
    session = open_session(Source(data=tmp_path / "spaced.csv", columns=Columns(segments=("region",), date="week")),
                           ledger_path, ANA)
    s = int(session.keys.indices_of([{"product": "apples 1 kg ", "region": "North"}])[0])
    assert session.label_parts(s) == ("apples 1 kg⟨U+0020⟩", "North")  # a look-alike: told apart already
    said = missing_text(session)
    assert " are not in these results (each present only under another spelling: apples 1 kg · North, …)" in said
    ledger.append(ledger_path, [ledger.Entry(series={"product": "apples 1 kg ", "region": "North"}, action="accept",
                                             fingerprint="f", results="ab" * 32, model="poly1")], BO)
    session.reload_ledger()
    assert session.spellings.like(s) is None  # decided: no longer new to the ledger
    assert session.label_parts(s) == ("apples 1 kg⟨U+0020⟩", "North")  # before: ('apples 1 kg ', 'North')
    assert session.label(s) == "apples 1 kg⟨U+0020⟩ · North"
    assert missing_text(session) == said  # still present only under another spelling (before: the clause lost)
