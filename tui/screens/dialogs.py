"""Small modal dialogs: pick a candidate and write a note, type text, choose one of a few options, help, errors."""
from __future__ import annotations

import time

from rich.console import RenderableType
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.message import Message
from textual.screen import ModalScreen
from textual.scrollbar import ScrollBarRender
from textual.widgets import Input, OptionList, Static
from textual.widgets.option_list import Option

from ..text import literal

LOST_WITHIN = 0.5  # seconds: a key taken by nothing this long before a text box opens is counted lost for it


class Dialog(ModalScreen):
    """A modal dialog that closes once.  Keys typed ahead reach the dialog's focused widget before it has closed
    (Textual forwards each key to the focus of the moment), so a second Enter could answer it again — and
    Textual's ``dismiss`` pops whatever screen is on top: the triage screen itself, leaving a blank terminal
    where no key acts.  Only the first answer counts."""

    # Ctrl+C leaves pricefold from any dialog as from the list (a modal screen ends the key's way to the app)
    BINDINGS = [Binding("ctrl+c", "app.interrupt", show=False, priority=True)]

    def dismiss(self, result=None):
        if self.app.screen is not self:  # answered already: not this dialog's screen to pop
            return None
        return super().dismiss(result)


class DialogBox(Vertical):
    """A dialog's box.  It says when its size changes, the terminal's or not: a notification's band at the foot of
    the screen takes rows from it (``base.tcss``), and its dialog fits itself to what is left."""

    class Resized(Message):
        """The box took another size."""

    def on_resize(self) -> None:
        self.post_message(self.Resized())


def band_height(screen) -> int:
    """Rows the notifications take at the foot of ``screen`` (0 without one; their rack measures nothing)."""
    return sum(toast.outer_size.height for toast in screen.query("Toast"))  # Textual's own widget, by name


class NoteField(Input):
    """The text field of a note.  Esc with a key right behind it (typed fast, or bunched together over SSH) reaches
    a terminal program as one key, alt+that key: the field typed it into the note, and the box stayed open (a
    trial's accept past stop flags was signed with '/…' meant for a search).  Such a key is the Esc it began with:
    the box is cancelled, the key after it dropped."""

    async def _on_key(self, event) -> None:
        if event.key.startswith("alt+"):
            event.stop()
            event.prevent_default()
            self.screen.action_cancel()
            return
        await super()._on_key(event)


class PickList(OptionList):
    """A dialog's list of things to pick: ↑ at the first row and ↓ at the last stay there.  Textual's own list went
    round to the other end: a trial's ↑ pressed once more than the top needed picked the bottom model, unseen
    (poly5 signed for poly0)."""

    def action_cursor_up(self) -> None:
        self._step(-1)

    def action_cursor_down(self) -> None:
        self._step(1)

    def _step(self, way: int) -> None:
        at = self.highlighted
        if at is None:
            if way > 0:
                self.action_first()
            else:
                self.action_last()
            return
        ahead = range(at + way, len(self.options) if way > 0 else -1, way)
        self.highlighted = next((i for i in ahead if not self.get_option_at_index(i).disabled), at)


class Question(VerticalScroll, can_focus=False):
    """What a dialog asks, above its answer (a note box, a choice) and the keys' hint."""


class Asking(Dialog):
    """A dialog that asks (``Question``) and takes an answer below it.  A question too long for the screen (a
    look-alike's at 60×20, one naming a 200-character product at 80×24) had pushed the answer under the dialog's
    edge — the choice list gone while ↑ and Enter still picked an unseen "Yes".  Where the whole does not fit,
    its padding goes, then the dialog takes its greatest height and the larger part gives way: a long question
    scrolls in the room the answer leaves (``long``: PgUp/PgDn, as the border says when it is cut), a long
    choice list under a short question scrolls itself (``many``); the hint stays whole."""

    BINDINGS = [Binding("pageup", "read(-1)", show=False, priority=True),
                Binding("pagedown", "read(1)", show=False, priority=True)]  # never the choice list's

    def action_read(self, way: int) -> None:
        question = self.query_one(Question)
        question.scroll_to(y=question.scroll_y + way * max(question.size.height - 1, 1), animate=False)

    def on_mount(self) -> None:
        self.call_after_refresh(self._fit)

    def on_resize(self) -> None:
        if self.app.size == getattr(self, "_fitted_to", None):
            return  # a layout of its own (a class set by ``_fit``), not the terminal's: fitted already
        self._fitted_to = self.app.size
        self.remove_class("tight", "long", "many")  # measured again as they are: the terminal may have grown
        self.call_after_refresh(self._fit)

    def _fit(self) -> None:
        """One step a layout while the whole does not fit: first the padding goes (``tight``), then the larger
        part gives way (``long`` or ``many``)."""
        if not self.is_attached or not self.query(Question):
            return  # answered and closing
        dialog, hint, question = self.query_one(".dialog"), self.query_one("#dialog-hint"), self.query_one(Question)
        given_way = self.has_class("long") or self.has_class("many")  # (has_class of two asks for both)
        if not given_way and hint.region.bottom > dialog.content_region.bottom:
            if not self.has_class("tight"):
                self.add_class("tight")
            else:
                choices = self.query(OptionList)
                many = bool(choices) and choices.first().virtual_size.height > question.virtual_size.height
                self.add_class("many" if many else "long")
            self.call_after_refresh(self._fit)
        # long only where the question did not fit the dialog's greatest height with its padding gone: it is cut
        dialog.border_subtitle = "PgDn/PgUp: the whole question" if self.has_class("long") else ""


class TextDialog(Asking):
    """One line of text; Enter returns it, Escape cancels.  ``required`` refuses an empty answer."""

    # Ctrl+C leaves pricefold from here too (the text field would take it as copy and do nothing); with a note
    # typed, the first press only says so and a second leaves: a note is never lost to one stray key.
    BINDINGS = [Binding("escape", "cancel", "cancel"), Binding("ctrl+c", "leave", show=False, priority=True)]

    def __init__(self, title: str, placeholder: str = "", required: bool = False, value: str = "",
                 about: Text | None = None) -> None:
        super().__init__()
        self._warned = False  # Ctrl+C pressed once with a note typed
        self._lost = False  # keys typed before the field had the focus were lost: the next Enter asks to look
        self.title_text, self.placeholder, self.required, self.value = title, placeholder, required, value
        self.about = about  # what the note is about (an accept past a stop flag: the numbers being signed)

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog asking"):
            with Question():
                yield Static(literal(self.title_text, "bold"), markup=False)
                if self.about is not None:
                    yield Static(self.about, markup=False, id="dialog-about")
            yield NoteField(value=self.value, placeholder=self.placeholder, id="dialog-input")
            yield Static(Text("Enter to confirm · Esc to cancel", style="dim"), id="dialog-hint", markup=False)

    def on_mount(self) -> None:
        """Keys lost just before this box opened (to a dialog closing, on the way here) were most likely meant for
        it: its first Enter says so too."""
        if time.monotonic() - getattr(self.app, "key_lost_at", -1.0) < LOST_WITHIN:
            self._lost = True

    def on_input_submitted(self, event: Input.Submitted) -> None:
        if self._lost:
            self._lost = False
            self.query_one("#dialog-hint", Static).update(Text(
                "Keys typed before this box opened were lost: check the text, then Enter · Esc to cancel",
                style="bold #ff875f"))
            return
        if self.required and not event.value.strip():
            self.query_one("#dialog-hint", Static).update(Text("A note is required here.", style="bold #ff875f"))
            return
        self.dismiss(event.value)

    def keys_lost(self) -> None:
        """Keys meant for this box went elsewhere (``TriageApp.on_key``): the next Enter only says so."""
        self._lost = True

    def action_cancel(self) -> None:
        self.dismiss(None)

    def holds_text(self) -> bool:
        """Something is typed in the box (what leaving now would not record)."""
        return bool(self.query_one("#dialog-input", Input).value.strip())

    def action_leave(self) -> None:
        if self.holds_text() and not self._warned:
            self._warned = True
            self.query_one("#dialog-hint", Static).update(Text(
                "Ctrl+C again leaves pricefold without recording this note · Enter to confirm · Esc to cancel",
                style="bold #ff875f"))
            return
        self.app.action_interrupt()


class ChoiceDialog(Asking):
    """Pick one option by arrow keys and Enter; returns its id."""

    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, title: str, options: list[tuple[str, str]], current: str | None = None) -> None:
        super().__init__()
        self.title_text, self.options, self.current = title, options, current

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog asking"):
            with Question():
                yield Static(literal(self.title_text, "bold"), markup=False)
            yield PickList(*[Option(Text(label), id=key) for key, label in self.options], id="dialog-options")
            yield Static(Text("↑↓ to move · Enter to choose · Esc to cancel", style="dim"), markup=False,
                         id="dialog-hint")

    def on_mount(self) -> None:
        options = self.query_one(OptionList)
        keys = [key for key, _ in self.options]
        if self.current in keys:
            options.highlighted = keys.index(self.current)

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        self.dismiss(event.option.id)

    def action_cancel(self) -> None:
        self.dismiss(None)


class WholeCells(ScrollBarRender):
    """A scrollbar whose thumb fills whole cells.  Textual ends a thumb in eighth-cell glyphs (▆ at its top, ▂ at its
    bottom) drawn on the track's colour: on the help's dim track a trial read them as two stray marks, one glued to
    the text ('outside the▆')."""

    VERTICAL_BARS = [" "] * 8  # (a blank end is left to the track: the thumb is its whole cells)


class MessageDialog(Dialog):
    """Text to read (help, an error); any of Enter, Escape or q closes it."""

    BINDINGS = [Binding("escape,enter,q,question_mark", "close", "close")]

    def __init__(self, body: RenderableType, classes: str = "") -> None:
        super().__init__(classes=classes)
        self.body = body

    def compose(self) -> ComposeResult:
        with VerticalScroll(classes="dialog wide", id="message-scroll"):
            yield Static(self.body, markup=False, id="message-body")
            yield Static(Text("↑↓ to scroll · Esc or Enter to close", style="dim"), markup=False)

    def on_mount(self) -> None:
        scroll = self.query_one("#message-scroll")
        scroll.vertical_scrollbar.renderer = WholeCells
        scroll.focus()

    def action_close(self) -> None:
        self.dismiss(None)
