"""The help text: keys, what the flags mean, and the cautions."""
from __future__ import annotations

from rich.console import Group
from rich.table import Table
from rich.text import Text

from fitcore.review.flags import FLAGS
from fitcore.review.plan_words import caution

from .listing import FILTER_TITLES, FILTERS
from .text import clean, printable
from .widgets.status_line import cut_off_text

KEYS = [
    ("↑ ↓ PgUp PgDn Home End", "move in the list"),
    ("] [", "next / previous series needing attention"),
    ("Tab", "switch between the list and the evidence (narrow screens show one at a time)"),
    ("Enter", "narrow screens: open the evidence of the highlighted series; in a dialog: confirm"),
    ("Esc", "narrow screens: back to the list; in a dialog: cancel, nothing is recorded"),
    ("a", "accept the proposed curve (past a stop flag or shifted, a note saying why comes first)"),
    ("o", "override: compare every candidate's numbers and flags, pick one (a note is required)"),
    ("n", "add a note"),
    ("h", "hold: park the series for follow-up (a reason is optional)"),
    ("u", "revoke your latest decision made on this screen, wherever it is (the cursor goes there)"),
    ("/", "search every series by key; / and Enter again for the next match"),
    ("f", "filter: " + "; ".join(FILTER_TITLES[name] for name in FILTERS) + " — and, within the status shown, "
          "one flag (counts shown)"),
    ("s", "sort: attention, key, lowest score, fewest observations"),
    ("c", "with controls: the observations chart between raw volumes and volumes adjusted to the plan's "
          "controls (each week's volume moved by the fitted control terms to the plan's control values: what "
          "the fitted curve gives, not what that week would have sold)"),
    ("?", "this help"),
    ("q, Ctrl+C", "quit (every decision is already in the ledger)"),
    ("Ctrl+Z", "to the shell (fg brings the screen back)"),
]

YOU_DECIDE = "pricefold proposes a curve; you decide, and the ledger records that you did."


def settings_text(results) -> str:
    """How every number on the screen was made: the weighting, the controls and the values each series' plan
    volume holds them at (its own: the evidence says each), and the caution naming what is not held fixed."""
    from fitcore.review.plan_words import weight_column, weighting_words
    said = f"Every fit {weighting_words(weight_column(results))}."
    ctl = results.controls
    columns = [] if ctl is None else list(ctl.names[:len(ctl.names) - 2 * ctl.season])
    season = 0 if ctl is None else ctl.season
    if columns or season:
        held = ", ".join(columns) + (", " if columns and season else "") + ("the season" if season else "")
        said += (f" Controls held fixed in every curve: {held}; each series' plan volume holds them at its plan "
                 "values (the evidence says which).")
    return f"{said}\n\nCautions. {caution(columns, season, YOU_DECIDE)}"


def _grid(rows: list[tuple[str, str]]) -> Table:
    """Two columns, so a wrapped meaning keeps its indent under the one above it."""
    grid = Table.grid(padding=(0, 2), pad_edge=True)
    grid.add_column(style="bold", no_wrap=True)
    grid.add_column()
    for name, meaning in rows:
        grid.add_row(name, meaning)
    return grid


def ledger_text(book, keys: str | None = None) -> Group:
    """Which ledger, whether its chain verifies, what the header says of it and the results in full (``keys``:
    another ledger the results were fitted against, key columns that differ, look-alikes, missing series), and its
    head (``SEQ:DIGEST`` of the last whole record)."""
    text = Text("\nLedger ", style="bold")
    text.append(clean(str(book.path)))
    state = "changed under this screen" if book.replaced else book.state  # not "broken": it may verify afresh
    text.append(f"\n  {state}" + (f": {printable(str(book.problem))}" if book.problem else ""))
    if book.notes:  # the chain verifies up to its last whole record; what follows it does not count
        text.append(" up to its last whole record, but " + cut_off_text(book), style="bold")
    if keys:
        text.append(f"\n  {keys}", style="bold")
    text.append("\n")
    text.append("  head (sequence number and digest of its last whole record):", style="dim")
    # one unbroken word of 66+ characters: on a narrow screen folded at the edge, never run under the scrollbar
    head = Text(f"  {book.head_text}", style="dim", overflow="fold")
    return Group(text, head)


def help_text(book=None, keys: str | None = None, rejected: str | None = None, results=None) -> Group:
    """Keys, flags, marks, the fit's settings (``results``: its weighting and controls) and cautions; then the
    data's rejected rows (``rejected``: ``rejected_text``'s words), then the ledger (``ledger_text``)."""
    flags = [(f"{'!' if severity == 'stop' else '?'} {code}", f"{severity}: {meaning}")
             for code, severity, meaning in sorted(FLAGS, key=lambda flag: flag[1] != "stop")]
    return Group(
        Text("Keys", style="bold"), _grid(KEYS),
        Text("\nEvery decision acts on the series the screen shows, and is in the ledger at once. When another "
             "analyst decides the series you are on, it stays listed with who did what, and decision keys wait "
             "until you move."),
        Text("\nFlags (! stop: do not put the curve into a plan unseen; ? warn: worth a look)", style="bold"),
        _grid(flags),
        Text("\nStatus marks: · pending  ✓ accepted  ↺ overridden  ‖ held  ! stale (data changed since)"),
        Text("≈North in the flags column: the series is new to the ledger, and looks like a ledger series these "
             "results do not hold, spelled North there (case, Unicode form or spaces differ); a decision on it asks "
             "first, as it records a new series beside that one"),
        Text("proposes poly5 (→poly5 where short of room) in the flags column: the flags after it are this "
             "proposal's, not those of the model listed (signed on other data, or accepted from another fit)"),
        Text("\nSettings", style="bold"),
        Text(settings_text(results) if results is not None else "Cautions. " + caution(decides=YOU_DECIDE),
             style="italic"),
        *([Text("\n" + rejected)] if rejected else []),
        *([ledger_text(book, keys)] if book is not None else []))
