"""Esc with a punctuation key right behind it, read as the Esc it began with.

A terminal sends Esc as one byte, so Esc followed within the escape delay (100 ms) by another key — typed fast, or
bunched together over SSH — arrives as one two-byte sequence.  Textual's parser reads Esc+letter as alt+letter, but
for punctuation it drops the Esc: "\\x1b/" became a plain "/".  In a note box that typed "/" into the note and kept
the box open, and a trial's search words were signed as the note of an accept past stop flags.  Here such a key
keeps its alt+, as letters do; the note box (``dialogs.NoteField``) takes any alt+ key as Esc.
"""
from __future__ import annotations


def keep_escape_on_punctuation() -> None:
    """Patch Textual's terminal parser once (left as it is where its shape is not the one this was made for)."""
    try:
        from textual import events
        from textual._xterm_parser import XTermParser
    except ImportError:
        return
    original = getattr(XTermParser, "_sequence_to_key_events", None)
    if original is None or getattr(original, "keeps_escape", False):
        return

    def sequence_to_key_events(self, sequence: str, alt: bool = False):
        for event in original(self, sequence, alt):
            if alt and len(sequence) == 1 and not sequence.isalnum() and not event.key.startswith("alt+"):
                event = events.Key(f"alt+{event.key}", event.character)
            yield event
    sequence_to_key_events.keeps_escape = True
    XTermParser._sequence_to_key_events = sequence_to_key_events
