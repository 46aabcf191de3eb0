"""``sample/next_week.py`` on a base whose product was renamed (not one ``generate.py`` invents): the series is
extended by the plain rule its docstring gives, the others exactly as without the rename.
Before: a traceback, ``KeyError: 'crème cocoa 250 g'``."""
from __future__ import annotations

import csv
import subprocess
import sys
from pathlib import Path

SAMPLE = Path(__file__).resolve().parents[2] / "sample"
OLD, NEW = "cocoa 250 g", "crème cocoa 250 g"


def added_rows(base: Path, out: Path) -> list[list[str]]:
    done = subprocess.run([sys.executable, str(SAMPLE / "next_week.py"), str(out), "--weeks", "2", "--from", str(base)],
                          capture_output=True, text=True)
    assert done.returncode == 0 and not done.stderr, done.stderr
    with open(base, newline="", encoding="utf-8") as handle:
        read = sum(1 for _ in handle)
    with open(out, newline="", encoding="utf-8") as handle:
        return list(csv.reader(handle))[read:]


def test_a_renamed_product_is_extended_and_the_others_are_not_moved(tmp_path):
    text = (SAMPLE / "wholesale.csv").read_text(encoding="utf-8")
    renamed = tmp_path / "base.csv"
    renamed.write_text(text.replace(f"\n{OLD},", f"\n{NEW},"), encoding="utf-8")
    plain = added_rows(SAMPLE / "wholesale.csv", tmp_path / "plain.csv")
    moved = added_rows(renamed, tmp_path / "renamed.csv")
    assert len(moved) == len(plain) == 2 * 180
    others = [(row, before) for row, before in zip(moved, plain) if row[0] != NEW]
    assert len(others) == 2 * 177 and all(row == before for row, before in others)
    own = [row for row in moved if row[0] == NEW]
    assert sorted({row[1] for row in own}) == ["East", "North", "South"] and len(own) == 6
    assert all(row[2] > "2026-11-23" and float(row[3]) > 0 and int(row[4]) > 0 for row in own)
