"""The README's synopses name exactly the options each command takes (trials found triage's saying
"[fit and column options as for fit]" while it refuses --strict, --engine, -q and -o)."""
from __future__ import annotations

import re
from pathlib import Path

import pytest

from pricefold.cli import build_parser

README = Path(__file__).parents[2] / "README.md"


def synopsis(command: str) -> str:
    """The README's code block that starts ``pricefold COMMAND``."""
    found = re.search(rf"```\n(pricefold {command} [^`]*)```", README.read_text())
    assert found, command
    return found.group(1)


def taken(command: str) -> list[set[str]]:
    """Each option's spellings (``-o``, ``--output``), ``--help`` aside."""
    parser = build_parser()
    sub = next(a for a in parser._actions if a.dest == "command").choices[command]
    return [set(action.option_strings) for action in sub._actions if action.option_strings and action.dest != "help"]


@pytest.mark.parametrize("command", ["fit", "triage"])
def test_the_synopsis_names_every_option_the_command_takes_and_no_other(command):
    named = set(re.findall(r"(?<![\w-])(--?[a-z][a-z-]*)", synopsis(command)))
    options = taken(command)
    assert named - set().union(*options) == set(), "named but refused"
    assert [sorted(o) for o in options if not o & named] == [], "taken but not named"


def test_the_readme_says_once_how_pricefold_gets_on_path_then_writes_it_one_way():
    """Trials found examples with bare ``pricefold …`` beside others with ``.venv/bin/pricefold …``, while the
    setup made only ``.venv/bin/pricefold`` and nothing said how to put it on PATH."""
    text = README.read_text()
    said = text.index("`. .venv/bin/activate`")
    assert said < text.index("## `pricefold fit`")  # near the top, before the first example needing it
    rest = text[said:]
    assert re.findall(r"\.venv/bin/(?:pricefold [a-z]|pip install)", rest) == []
