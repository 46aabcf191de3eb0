"""The override dialog: every available candidate with the numbers an analyst decides on.

For each: CV error ± SE, Q², plan volume with its 95% prediction interval, elasticity at the plan
price, and the flags that candidate would carry itself (rising, below-zero, outside-range).  Where the
dialog is too narrow for every column (60 cells), the interval opens each model's second line instead, then the
columns close up to one cell apart, then the elasticity and ± SE follow it, as far as the first line needs; the
second line's flags give way to its numbers, counted where cut (``! rising +1``).  The proposal is shown for comparison but cannot be picked.  The dialog opens on the
model that stands (an earlier override) or on the proposal, highlighted: another candidate highlighted would read
as a recommendation, and the candidate with the next lowest CV error may well carry cautions of its own.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.widgets import OptionList, Static
from textual.widgets.option_list import Option

from fitcore.fit.results import Results
from fitcore.review.candidate_checks import candidate_checks
from fitcore.review.flags import Diagnosis
from fitcore.review.formats import fmt, money, two_places

from ..cells import percent
from ..text import literal
from .dialogs import Dialog, DialogBox, PickList, band_height

SHORT = 18  # terminal rows: below this, the dialog drops its padding and explanations so the models keep rows
HEAD = ("model", "CV MSE", "± SE", "Q²", "volume", "95% PI", "elast.")
INTERVAL = HEAD.index("95% PI")
ELASTICITY, SE = HEAD.index("elast."), HEAD.index("± SE")
# Too narrow for every column, the first that fits of these layouts: (the columns on a model's second line, the
# cells between columns) — the interval first (60 cells: it ran off the edge), then a narrower gap, then the
# elasticity (its digits before any flag: at 60 cells a 3,000-series file's read "…"), then ± SE.
NARROW = (((INTERVAL,), 2), ((INTERVAL,), 1), ((INTERVAL, ELASTICITY), 1), ((INTERVAL, ELASTICITY, SE), 1))
SECOND_WORDS = {INTERVAL: "PI ", ELASTICITY: "elast. ", SE: "± "}
# cells around a model's line: the dialog's border and padding (2 + 4), the list's border and padding (4), its
# scrollbar (2) and the mark before the name (2); narrow, the dialog takes the screen's width with less padding
AROUND = 14
AROUND_NARROW = 12
INDENT = 4  # a model's second line begins under its name


@dataclass(frozen=True)
class CandidateRow:
    """One candidate's numbers as the dialog prints them (the formats ``pricefold show`` uses)."""

    name: str
    cv_mse: str
    cv_se: str
    q2: str
    volume: str
    interval: str
    elasticity: str
    flags: tuple[str, ...]
    proposed: bool


def candidate_rows(results: Results, s: int, diagnosis: Diagnosis) -> list[CandidateRow]:
    rows = []
    planned = math.isfinite(results.plan_price[s])
    thresholds, outside = diagnosis.thresholds, diagnosis.controls_outside(s)  # the same for every candidate
    for c, name in enumerate(results.names):
        if not results.available[s, c]:
            continue
        rows.append(CandidateRow(
            name=name, cv_mse=fmt(results.cv_mse[s, c]), cv_se=fmt(results.cv_se[s, c]),
            q2=percent(results.q2[s, c]),
            volume=fmt(results.plan_volume[s, c]) if planned else "—",
            interval=f"{fmt(results.plan_lo[s, c])} to {fmt(results.plan_hi[s, c])}" if planned else "—",
            elasticity=_elasticity(results, s, c) if planned and results.plan_volume[s, c] > 0 else "—",
            flags=candidate_checks(results, s, c, thresholds, outside).codes, proposed=c == results.chosen[s]))
    return rows


def _elasticity(results: Results, s: int, c: int) -> str:
    """A candidate's elasticity at the plan price; a flat curve's 'flat': its 0 is the model's choice, not a
    measurement (the dialog showed 0.00 beside measured ones; the evidence pane, show and the report say so)."""
    return "flat" if results.candidates[c].degree == 0 else two_places(results.plan_elasticity[s, c])


def _cells(row: CandidateRow) -> tuple[str, ...]:
    return (row.name, row.cv_mse, row.cv_se, row.q2, row.volume, row.interval, row.elasticity)


def dialog_room(screen_width: int, narrow: bool = False) -> int:
    """Cells a model's line has in the dialog on a screen ``screen_width`` wide (``.dialog.wide``: 100 cells,
    at most 95% of the screen; ``narrow``: the screen's width, less padding)."""
    return min(100, screen_width) - AROUND_NARROW if narrow else min(100, screen_width * 95 // 100) - AROUND


def fitted_flags(flags: tuple[str, ...], room: int) -> str:
    """``! rising · below-zero`` in ``room`` cells: the flags that do not fit counted, as the list counts them
    (``! rising +1``); the first one shown even where nothing fits (the line's end cuts it)."""
    for shown in range(len(flags), 0, -1):
        more = len(flags) - shown
        text = "! " + " · ".join(flags[:shown]) + (f" +{more}" if more else "")
        if len(text) <= room or shown == 1:
            return text
    return ""


class Candidates(PickList):
    """The candidates, Enter on the proposal said to be refused.  The proposal is an option like the others, so
    that it shows highlighted where the dialog opens on it (Textual draws a disabled option without its highlight:
    the dialog opened with no row lit), and ↑↓ pass over it.  The list's own Enter, not a priority binding of the
    dialog's: a priority binding runs before the moves typed ahead of it are taken (↓ Enter typed fast found the
    proposal still highlighted, and was lost)."""

    def action_select(self) -> None:
        at = self.highlighted
        if at is not None and self.screen.rows[at].proposed:
            self.screen.refuse(at)
            return
        super().action_select()


class OverrideDialog(Dialog):
    """Pick the candidate to put in the plan instead of the proposal; returns its name."""

    # Enter through the dialog, not the list: on the proposal (which cannot be picked) the list did nothing
    # and said nothing, and a note typed next went in as keys.
    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, results: Results, s: int, label: str, diagnosis: Diagnosis, standing: str | None,
                 accepted: bool = False) -> None:
        """``standing``: the model that stands where it is not the proposal; ``accepted``: it stands by an accept
        (of another fit's proposal), not an override."""
        super().__init__()
        self.results, self.s, self.label, self.standing = results, s, label, standing
        self.standing_mark, self.standing_role = (("✓ ", "accepted, stands now · ")
                                                  if accepted else ("↺ ", "stands now · "))
        self.rows = candidate_rows(results, s, diagnosis)
        # the columns on each model's second line and the cells between columns (``model_lines``, from the width)
        self.second, self.gap = (), 2

    @property
    def narrow(self) -> bool:
        return bool(self.second)

    def line_width(self, columns: tuple[int, ...], gap: int = 2) -> int:
        """Cells of a model's first line holding the ``columns`` (indices into ``HEAD``), ``gap`` cells apart."""
        widths = [max(len(HEAD[i]), *(len(_cells(r)[i]) for r in self.rows)) for i in columns]
        return sum(widths) + gap * (len(widths) - 1)

    def model_lines(self, width: int) -> tuple[tuple[int, ...], int]:
        """(the columns a model's second line takes, the gap between columns) on a screen ``width`` wide: every
        column on the first line where they fit, else the first of ``NARROW`` whose first line fits the narrow
        dialog (the last where none does)."""
        every = tuple(range(len(HEAD)))
        if self.line_width(every) <= dialog_room(width):
            return (), 2
        room = dialog_room(width, narrow=True)
        return next((layout for layout in NARROW
                     if self.line_width(tuple(c for c in every if c not in layout[0]), layout[1]) <= room), NARROW[-1])

    def compose(self) -> ComposeResult:
        results, s = self.results, self.s
        self.second, self.gap = self.model_lines(self.app.size.width)
        self.set_class(self.narrow, "narrow")
        columns = tuple(i for i in range(len(HEAD)) if i not in self.second)
        widths = [max(len(HEAD[i]), *(len(_cells(r)[i]) for r in self.rows)) for i in columns]
        # a second line's room: the first line's and its mark's, less the indent
        room = dialog_room(self.app.size.width, self.narrow) + 2 - INDENT

        def line(cells) -> str:
            cells = [cells[i] for i in columns]
            return (" " * self.gap).join(cell.ljust(w) if i == 0 else cell.rjust(w)
                                         for i, (cell, w) in enumerate(zip(cells, widths)))

        plan = results.plan_price[s]
        title = literal(f"Override the proposal for {self.label}", "bold")
        below = {INTERVAL: "95% interval (PI)", ELASTICITY: "elasticity", SE: "± SE"}
        above = [word for i, word in ((HEAD.index("volume"), "volume"), (INTERVAL, "95% interval"),
                                      (ELASTICITY, "elasticity")) if i in columns]
        said = (f"{' and '.join(above)}; below each, its {', '.join(below[i] for i in self.second)} and own flags"
                if self.narrow else "volume, 95% interval, elasticity; below each, its own flags")
        sub = Text(f"At the plan price {money(plan)}: {said}"
                   if math.isfinite(plan) else "No plan price; below each model, its own flags", style="dim")
        with DialogBox(classes="dialog wide override"):
            yield Static(title, markup=False, id="override-title")
            yield Static(sub, markup=False, id="override-sub")
            yield Static(Text("  " + line(HEAD), style="bold"), markup=False, id="override-head")
            options = []
            for row in self.rows:
                stands = row.name == self.standing and not row.proposed
                prompt = Text(("✓ " if row.proposed else self.standing_mark if stands else "  ") + line(_cells(row)),
                              style="dim" if row.proposed else "")  # shown to compare, not to pick
                prompt.append("\n" + " " * INDENT)
                numbers = [SECOND_WORDS[i] + _cells(row)[i] for i in self.second if _cells(row)[i] != "—"]
                for number in numbers:  # before the flags: a number is never what the line's end cuts
                    prompt.append(number)
                    prompt.append(" · ", style="dim")
                rest = room - sum(len(number) + 3 for number in numbers)
                role = "proposed · " if row.proposed else self.standing_role if stands else ""
                flags = fitted_flags(row.flags, rest - len(role)) if row.flags else "no shape or range flag"
                if len(role) + len(flags) > rest:  # the flags before the role's words (its mark, ✓ or ↺, stays)
                    role, flags = "", fitted_flags(row.flags, rest) if row.flags else flags
                prompt.append(role, style="dim")
                prompt.append(flags, style="#ff875f" if row.flags else "dim")
                options.append(Option(prompt, id=row.name))
            yield Candidates(*options, id="dialog-options")
            yield Static(Text("↑↓ to move · Enter to choose (a note follows) · Esc to cancel", style="dim"),
                         markup=False, id="override-hint", classes="override-hint")
            yield Static(Text("Enter to choose · Esc to cancel", style="dim"), markup=False, id="override-hint-short",
                         classes="override-hint")

    async def on_resize(self) -> None:
        self.set_class(self.app.size.height < SHORT, "short")
        if self.model_lines(self.app.size.width) != (self.second, self.gap):  # another layout: built again, on its model
            options = self.query_one(OptionList)
            at, focused = options.highlighted, options.has_focus
            await self.recompose()
            options = self.query_one(OptionList)
            options.highlighted = at
            if focused:
                options.focus()
            self.call_after_refresh(self._from_a_whole_row)

    def on_mount(self) -> None:
        self.set_class(self.app.size.height < SHORT, "short")
        options = self.query_one(OptionList)
        names = [row.name for row in self.rows]
        proposed = next((row.name for row in self.rows if row.proposed), None)
        first = self.standing if self.standing in names else proposed
        if first is not None:  # the proposal cannot be picked: Enter on it says so
            options.highlighted = names.index(first)
        options.focus()
        self.call_after_refresh(self._from_a_whole_row)

    def on_dialog_box_resized(self) -> None:
        """The room for the box changed (the terminal, or a notification's band at the foot: a refusal's message
        at 60×20 took the keys and the list's lower border): laid out again as it would be, then squeezed."""
        room = (self.app.size, band_height(self))
        if room == getattr(self, "_fitted_to", None):
            return  # a layout of its own (``squeezed`` set or taken off): fitted already
        self._fitted_to = room
        self.remove_class("squeezed")
        self.call_after_refresh(self._squeeze)

    def _squeeze(self) -> None:
        """Where the keys' line falls below the box, the list gives way (``squeezed``: it takes the rows the rest
        leaves, and scrolls) so that the keys and the list's border stay."""
        if not self.is_attached or not self.query(DialogBox):
            return  # answered and closing
        box = self.query_one(DialogBox)
        hint = next((hint for hint in self.query(".override-hint") if hint.display), None)
        if hint is not None and hint.region.bottom > box.content_region.bottom:
            self.add_class("squeezed")
            self.call_after_refresh(self._from_a_whole_row)

    def _from_a_whole_row(self) -> None:
        """Start the list at a whole candidate (two lines each), the proposal too when both fit, never
        halfway through one: a flags line at the top without its model read as the wrong model's."""
        options = self._list()
        if options is None:
            return
        picked = options.highlighted or 0
        proposed = next((i for i, row in enumerate(self.rows) if row.proposed), picked)
        shown = max(options.scrollable_content_region.height // 2, 1)
        first = min(proposed, picked) if abs(proposed - picked) < shown else picked - shown + 1
        options.scroll_to(y=2 * max(first, 0), animate=False)

    def _list(self) -> OptionList | None:
        """The candidates' list, or None once the dialog was answered and is closing (keys typed fast): detached,
        or still attached while its children are being removed (a fix-up ran then and found no list)."""
        if not self.is_attached:
            return None
        found = self.query(OptionList)
        return found.first() if found else None

    def on_option_list_option_highlighted(self) -> None:
        self.call_after_refresh(self._whole_rows)

    def _whole_rows(self) -> None:
        """After a move, the list's top line is a model's first line: a list an odd number of lines high
        scrolls one line for the highlighted model and would show a flags line without its model."""
        options = self._list()
        if options is None:
            return
        top, height, picked = int(options.scroll_y), options.scrollable_content_region.height, options.highlighted
        if top % 2 == 0 or picked is None:
            return
        for y in (top + 1, top - 1):  # the highlighted model stays whole on screen
            if 0 <= y <= options.max_scroll_y and y <= 2 * picked and 2 * picked + 1 < y + height:
                options.scroll_to(y=y, animate=False)
                return

    def refuse(self, at: int) -> None:
        self.notify(f"{self.rows[at].name} is the proposal: move to another candidate (↑↓), or Esc.",
                    severity="warning", timeout=4, markup=False)

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        if self.rows[event.option_index].proposed:  # a click on it: refused as Enter is
            self.refuse(event.option_index)
            return
        self.dismiss(event.option.id)

    def action_cancel(self) -> None:
        self.dismiss(None)
