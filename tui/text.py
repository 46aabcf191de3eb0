"""Text from users' files, shown literally: each as ``clean`` shows it, never parsed as markup; messages built
from them through ``printable``."""
from __future__ import annotations

from rich.text import Text

from fitcore.text import clean, printable

__all__ = ["clean", "literal", "printable"]


def literal(message: str, style: str = "") -> Text:
    """A dialog's title as text, never markup: users' texts in it (a series' label) are ``clean``'s shown forms
    already, so it goes through ``printable``, which leaves them as shown."""
    return Text(printable(message), style=style)
