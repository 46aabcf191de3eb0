"""Text from users' files, shown literally: cleaned of control characters, never parsed as markup."""
from __future__ import annotations

from rich.text import Text

from fitcore.text import clean

__all__ = ["clean", "literal"]


def literal(text: str, style: str = "") -> Text:
    return Text(clean(text), style=style)
