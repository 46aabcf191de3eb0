"""Text from users' files, shown literally: cleaned of control characters, never parsed as markup."""
from __future__ import annotations

from rich.text import Text

from fitcore.text import clean, printable

__all__ = ["clean", "literal", "printable"]


def literal(text: str, style: str = "") -> Text:
    return Text(clean(text), style=style)
