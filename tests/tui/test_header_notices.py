"""The look-alikes' notice in the header in two lines at most (``status_line.notice_lines``): a trial's ~200-character
product name made it 10 of 24 lines at 80×24, leaving five rows of the list; cut, it says where it is whole."""
from __future__ import annotations

from rich.cells import cell_len

from tui.widgets.status_line import IN_FULL, NOTICE_LINES, notice_lines


def test_a_long_notice_keeps_two_lines_of_the_width_and_says_where_it_is_whole():
    name = "APPLES 1 KG EXTRA LONG NAME FOR THE WHOLESALE CATALOGUE " * 4
    said = f'Spelled otherwise: 6 series in these results look like series in L.jsonl (product "{name}" for …)'
    for width in (78, 58):
        lines = notice_lines(said, width)
        assert len(lines) == NOTICE_LINES == 2 and all(cell_len(line) <= width for line in lines)
        assert lines[0].startswith("Spelled otherwise: 6 series") and lines[-1].endswith("…" + IN_FULL)
    wide = "緑茶 ティーバッグ 20袋 " * 12  # two cells a character
    assert all(cell_len(line) <= 40 for line in notice_lines(f"Spelled otherwise: {wide}", 40))


def test_a_notice_that_fits_is_left_whole():
    said = "Spelled otherwise: 2 series in these results look like series in L.jsonl (region \"north\" for …)"
    assert " ".join(notice_lines(said, 78)) == said and len(notice_lines(said, 78)) == 2
    assert notice_lines("short", 78) == ["short"]
