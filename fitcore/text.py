"""Text from users' files, made safe to print: no control characters reach the terminal."""
from __future__ import annotations


def clean(text: str) -> str:
    """Replace every non-printable character (ESC, CR, BEL, …) with '?'; keep all printable text."""
    if text.isprintable():  # the usual case, checked in C
        return text
    return "".join(ch if ch.isprintable() else "?" for ch in text)
