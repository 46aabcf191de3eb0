"""The header: who is deciding, what is listed, and how many series stand where — fitted to the width.

One line when everything fits; otherwise the counts go to a second line, in shorter words
when they must, and the first keeps the title beside the analyst's name (cut if need be) and what is
listed.  Every count (stale included) is always shown.
"""
from __future__ import annotations

import os
from pathlib import Path

from rich.cells import cell_len
from rich.text import Text

from ..cells import cut, wrapped
from ..listing import FILTER_TITLES, SORT_TITLES
from ..text import clean, printable

TITLE = "pricefold triage"
WHO_KEEPS = 8  # cells of the analyst's name kept at least beside the title; with less room the title goes
# status, its word, its short form
WORDS = (("attention", "attention", "attn"), ("pending", "pending", "pend"), ("accepted", "accepted", "acc"),
         ("overridden", "overridden", "ovr"), ("held", "held", "held"), ("stale", "stale", "stale"))


def counts_text(counts: dict[str, int], width: int) -> str:
    """'attention 21 · pending 180 · accepted 0 · …' in the longest form that fits ``width``."""
    for joiner, form in (("  ·  ", 0), (" · ", 0), (" · ", 1), (" ", 1)):
        text = joiner.join(f"{words[form]} {counts[name]:,}" for name, *words in WORDS)
        if cell_len(text) <= width:
            return text
    return cut(text, width)


def listed_text(session) -> str:
    flag = f" ⚑ {session.flag_filter}" if session.flag_filter else ""
    return f"{len(session.view):,} listed ({FILTER_TITLES[session.filter]}{flag}; by {SORT_TITLES[session.sort]})"


def status_text(session, width: int) -> Text:
    """The header for a screen ``width`` cells wide (the widget's padding already taken off); a last line
    in bold when the ledger is broken or unverifiable (the screen is then read-only)."""
    text = _counts_lines(session, width)
    if not session.writable:
        said = f"READ-ONLY: {printable(session.read_only_why)}; nothing can be recorded"
        text.append("\n" + cut(said, width), style="bold reverse")
    else:
        said = tail_text(session)
        if said:  # an interrupted append (bold): whole (wrapped), until moved; then where it went
            text.append("\n" + said, style="bold" if session.book.notes else "")
    watch = session.results_watch
    if watch is not None and watch.said:  # the results replaced on disk (a refit): one line, cut
        text.append("\n" + cut(printable(watch.said), width), style="bold")
    for said, capped in ((fitted_text(session), True), (keys_text(session.key_columns), False),
                         (spellings_text(session), True), (elsewhere_text(session), False)):
        # while true; whole, but those naming a look-alike or a ledger's path (two lines, whole under ?)
        if said:
            text.append("\n" + ("\n".join(notice_lines(said, width)) if capped else said), style="bold")
    said = rejected_short(session)
    if said:  # rows not fitted: one line, cut, each row under ?
        text.append("\n" + cut(said, width), style="bold")
    said = session.missing.short(session.spellings.ledger_name)
    if said:  # a note, not a warning (a team ledger may hold other ranges): one line, cut, in full under ?
        text.append("\n" + cut(f"Not in these results: {said}", width))
    return text


NOTICE_LINES = 2  # the look-alikes' lines in the header at most: a long name took 10 of 24 lines at 80×24 (a trial)
IN_FULL = " (? in full)"


def notice_lines(said: str, width: int) -> list[str]:
    """A notice the header shows while it holds, in ``NOTICE_LINES`` lines of ``width`` cells at most, broken
    between words; where it is cut, its last line says that ``?`` shows it whole."""
    out = wrapped(said, width, NOTICE_LINES)
    if out[-1].endswith("…") and not said.endswith("…"):  # cut: room made for where to read the rest
        body = cut(out[-1][:-1], width - cell_len(IN_FULL))
        out[-1] = cut((body if body.endswith("…") else body + "…") + IN_FULL, width)
    return out


def missing_text(session) -> str | None:
    """'3 signed series in L.jsonl are not in these results (carrots 1 kg · North, …); renamed in the data? …'
    (``fitcore.ledger.missing``, every command's note), for ``?``, then each of them (``HELP_LISTS``) a line."""
    from fitcore.ledger.missing import RENAMED
    said = session.missing.said(session.spellings.ledger_name)
    if not said:
        return None
    return f"{said}; {RENAMED}:" + "".join(f"\n    {line}" for line in session.missing.listed(HELP_LISTS))


HELP_LISTS = 200  # the missing signed series ``?`` names, one a line (then "… and N more"); the rejected rows too


def rejected_short(session) -> str | None:
    """'shop.csv: 5 rows rejected (not fitted; each under ?): 2 negative unit_price · …' — ``fit``'s count of the
    rows its fit of the data rejected (``fitcore.data.validation.summary``), for the header: where to look
    first, as the line is cut at the screen's width."""
    rejects = session.rejects
    if rejects is None:
        return None
    from fitcore.data.validation import summary
    count, _, reasons = printable(summary(rejects.reasons)).partition(": ")
    return f"{clean(rejects.path.name)}: {count} (not fitted; each under ?): {reasons}"


def rejected_text(session) -> str | None:
    """The header's line, then each rejected row's line and reason (``HELP_LISTS`` at most), for ``?``: triage
    writes no rejects file; ``pricefold fit`` with the same options and ``-o OUT`` writes them beside OUT."""
    rejects = session.rejects
    if rejects is None:
        return None
    from fitcore.data.validation import misread, summary
    most = misread(rejects.reasons, session.results.data.source.get("rows") or 0)
    rows = [f"\n    {'line' if rejects.kind != 'parquet' else 'row'} {int(line)}: {printable(str(why))}"
            for line, why in zip(rejects.lines[:HELP_LISTS].tolist(), rejects.reasons[:HELP_LISTS])]
    more = f"\n    … and {len(rejects) - HELP_LISTS:,} more" if len(rejects) > HELP_LISTS else ""
    return (f"Rejected rows of {clean(str(rejects.path))}: {printable(summary(rejects.reasons))}{most}. They are "
            "not fitted; this screen writes no rejects file ('pricefold fit' with the same options and -o OUT "
            "writes each row, as in the data, to OUT's rejects file):" + "".join(rows) + more)


def keys_text(key_columns) -> str | None:
    """'Key columns differ: series keyed by product, but those in L.jsonl by product, region (…); …' — the one
    check where results meet a ledger (``fitcore.ledger.key_columns.mismatch``), for the screen."""
    said = key_columns.said
    if said is None:
        return None
    return (f"{keys_lead(key_columns)}: {said}; every series reads as pending; a decision starts a new set of "
            "series there (asked first)")


def keys_lead(key_columns) -> str:
    """What ``key_columns.said`` is about, in two or three words."""
    return "Key columns differ" if key_columns.mismatch else "No series shared"


def spellings_text(session) -> str | None:
    """'Spelled otherwise (≈ in the list): 54 series in these results look like series in L.jsonl under another
    spelling (region "north" for "North", …); …' (``fitcore.ledger.respelling``, every command's words), for the
    screen."""
    said = session.spellings.said
    if said is None:
        return None
    return f"Spelled otherwise (≈ in the list): {said}; a decision on one asks first"  # the mark first: the header cuts


ALIKE_DECIDES = ("A decision here records it as a new series beside that one, whose decisions stay where they are "
                 "(fix the spelling in the data to keep them).")


def alike_words(session, s: int) -> str:
    """'lemons · north looks like lemons · North in L.jsonl under another spelling (region "north" for "North"), a
    series these results do not hold (ana accepted poly1 at …).' — for series ``s`` (one of ``spellings``)."""
    from fitcore.ledger.replay import series_id
    from fitcore.ledger.respelling import looks_like

    spellings = session.spellings
    like = spellings.like(s)
    if like is None:  # found only under the writer's lock: a record just made
        return f"{session.label(s)} looks like a series just recorded in {spellings.ledger_name} under another spelling."
    history = session.histories.get(series_id(dict(zip(spellings.columns, like))))
    said = looks_like(spellings.columns, tuple(session.keys.key_of(s).values()), like, spellings.ledger_name,
                      history.latest if history is not None else None, spellings.alike(s) - 1)
    return f"{session.label(s)} looks like {said}."


def fitted_text(session) -> str | None:
    """'Recording into X.jsonl, not L, the ledger these results were fitted against: …' — both ledgers named for as
    long as the screen is open, on JSON and Parquet results alike (``TriageSession.fitted_elsewhere``): a stored
    file's backtest left out (``elsewhere``), once the data are fitted here the screen's own against this ledger."""
    fitted = session.fitted_elsewhere
    if fitted is None:
        return None
    empty = " (no decisions yet)" if not session.book.records else ""
    said = (f"Recording into {clean(str(session.ledger_path))}{empty}, not {clean(fitted)}, the ledger these "
            "results were fitted against")
    if session.elsewhere is not None and not session.results.rows_loaded:
        return f"{said}: their backtest and 'shifted' flags are left out"
    return f"{said} (backtested again here, against {clean(session.ledger_path.name)})"


def elsewhere_text(session) -> str | None:
    """'L.jsonl no longer holds record 294:…, the last one 'fit --ledger' read for R.parquet (…); …' (``fitcore.
    ledger.elsewhere.head_gone``, ``show --ledger``'s words): results fitted against this ledger, whose stored
    backtest read records it no longer holds, left out; once the data are fitted here, the screen's own.  (Results
    fitted against another ledger: ``fitted_text``.)"""
    if session.elsewhere is None or session.fitted_elsewhere is not None:
        return None
    if session.results.rows_loaded:
        return f"{printable(session.elsewhere)}; backtested again here, against {clean(session.ledger_path.name)}"
    return f"{printable(session.elsewhere)}; its backtest and 'shifted' flags are left out"


SIDE_FILE = "the next append moves it to a side file"  # how the reader's notes end (fitcore.ledger.reader)


def tail_text(session) -> str | None:
    """What the header says of the ledger's end: an interrupted append (``cut_off_text``), from the look that finds
    it — on opening or while the screen is open — until a decision moves it aside; then the side file this screen's
    decision moved it to (``moved_text``), the command line's words."""
    book = session.book
    if book.notes:
        return cut_off_text(book)
    return moved_text(book, session.tail_set_aside) if session.tail_set_aside is not None else None


def moved_text(book, side: Path) -> str:
    """'K.jsonl: the interrupted tail after its last whole record was moved to K.jsonl.torn-<UTC time> beside it' —
    as ``ledger_cli.record`` says it of a command's append."""
    from fitcore.ledger.files import tail_moved_words
    return clean(f"{book.path.name}: {tail_moved_words(side)}")


def cut_off_text(book) -> str:
    """'K.jsonl's last append was cut off: line 2: incomplete batch (…), not counted; the next decision moves it
    to K.jsonl.torn-<UTC time>' — the reader's own words (as every command prints them), for the screen."""
    name = clean(book.path.name)
    if book.unended:  # a whole last record without its line end: ended, not moved aside
        return f"{name}: {printable(str(book.notes[0]))}"
    said = [printable(str(note)) for note in book.notes]
    if all("blank line" in note for note in said):  # an editor's save: the note says where they go
        return f"{name}: {'; '.join(said)}"
    notes = "; ".join(note.replace(SIDE_FILE, "").rstrip("; ") for note in said)
    from fitcore.ledger.files import side_stem
    side = clean(side_stem(Path(os.path.realpath(book.path))))  # beside a linked ledger's target; a long name cut
    return f"{name}'s last append was cut off: {notes}; the next decision moves it to {side}.torn-<UTC time>"


def _counts_lines(session, width: int) -> Text:
    who = clean(session.who.analyst)
    listed = listed_text(session)
    counts = session.counts()
    text = Text()
    if cell_len(f"{TITLE}  {who}  ·  {listed}  ·  {counts_text(counts, 10**6)}") <= width:
        _first(text, TITLE, who, "  ·  ", listed)
        text.append(f"  ·  {counts_text(counts, 10**6)}")
        return text
    # two lines; the first keeps the title, the analyst and what is listed, in the longest form that fits:
    # spaced, then closer, then the analyst's name cut (the title went first before, at 100 columns already)
    room = width - cell_len(f"{TITLE}  ") - cell_len(f" · {listed}")
    if cell_len(f"{TITLE}  {who}  ·  {listed}") <= width:
        _first(text, TITLE, who, "  ·  ", listed)
    elif room >= min(cell_len(who), WHO_KEEPS):
        _first(text, TITLE, cut(who, room), " · ", listed)
    elif cell_len(f"{who} · {listed}") <= width:
        _first(text, "", who, " · ", listed)
    else:
        text.append(cut(f"{who} · ", max(width // 3, 8)), style="dim")
        text.append(cut(listed, width - cell_len(text.plain)))
    text.append("\n" + counts_text(counts, width))
    return text


def _first(text: Text, title: str, who: str, joiner: str, listed: str) -> None:
    """The header's first line: the title in bold (when given), the analyst dim, then what is listed."""
    if title:
        text.append(title, style="bold")
        text.append("  ")
    text.append(f"{who}{joiner}", style="dim")
    text.append(listed)
