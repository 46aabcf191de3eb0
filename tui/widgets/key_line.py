"""The footer: the keys that can act now, as one line of text.

Textual's own footer rebuilds a widget per key whenever the bindings may have changed (every
focus change, every dialog closed: after each decision taken through a note), and each rebuild
costs a layout pass of the whole screen.  This line is redrawn in place, and only when its text
changes; a click on a key runs it, as on Textual's footer.
"""
from __future__ import annotations

from rich.style import Style
from rich.text import Text
from textual.widgets import Static

KEY = Style(bold=True)
OFF = Style(dim=True)
KEPT = ("help", "quit")  # the keys the line keeps whatever else it drops for room


class KeyLine(Static):
    """``key description`` for every shown binding of the screen (dimmed when it cannot act); a click runs it."""

    DEFAULT_CSS = """
    KeyLine {
        dock: bottom;
        height: 1;
        background: $panel;
    }
    """

    def __init__(self, **kwargs) -> None:
        super().__init__(markup=False, **kwargs)
        self._said: str | None = None

    def on_mount(self) -> None:
        self.screen.bindings_updated_signal.subscribe(self, self.bindings_changed)
        self.bindings_changed(self.screen)

    def on_unmount(self) -> None:
        self.screen.bindings_updated_signal.unsubscribe(self)

    def bindings_changed(self, screen) -> None:
        text = self.keys_text(self.size.width or self.app.size.width)
        if text.plain != self._said:
            self._said = text.plain
            self.update(text, layout=False)  # one line, always: no layout pass

    def on_resize(self) -> None:
        self.bindings_changed(self.screen)

    def keys_text(self, width: int) -> Text:
        """The keys two cells apart, or one apart when that is what makes them all fit ``width``; where not even
        that fits, the rightmost keys go but help and quit (at 60 columns ``u revoke`` had pushed them off)."""
        items: list[tuple[str, str, Style, bool]] = []
        seen: set[str] = set()
        for node, binding, enabled, _ in self.screen.active_bindings.values():
            if not binding.show or binding.action in seen:
                continue
            seen.add(binding.action)
            click = Style.from_meta({"@click": f"{'screen' if node is self.screen else 'app'}.{binding.action}"})
            items.append((self.app.get_key_display(binding), binding.description, click + (Style() if enabled else OFF),
                          binding.action in KEPT))
        wide = sum(len(key) + len(description) + 3 for key, description, _, _ in items) <= width
        while not wide and 1 + sum(len(key) + len(description) + 2 for key, description, _, _ in items) > width:
            dropped = next((i for i in range(len(items) - 1, -1, -1) if not items[i][3]), None)
            if dropped is None:
                break
            del items[dropped]
        text = Text(no_wrap=True, overflow="crop")
        for key, description, style, _ in items:
            text.append(" " if wide or not text else "", style)
            text.append(key, style + KEY)
            text.append(f" {description} ", style)
        return text
