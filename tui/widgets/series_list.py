"""The series list: one line per series, drawn only for the rows on screen (Line API)."""
from __future__ import annotations

import textwrap

from rich.cells import cell_len
from rich.segment import Segment
from rich.style import Style
from textual.binding import Binding
from textual.geometry import Region, Size
from textual.message import Message
from textual.scroll_view import ScrollView
from textual.strip import Strip

from fitcore.review.flags import SEVERITY

from ..cells import cut, key_labels, longest_label, pad, percent
from ..session import STATUS_MARK, TriageSession, describe

STOP = Style(color="#ff875f")
WARN = Style(color="#d7af5f")
DONE = Style(color="#87af87")
NEWS = Style(color="#5fafff", italic=True)
DIM = Style(dim=True)
PLAIN = Style()  # never a segment without a style: Textual's NO_COLOR filter reads every segment's (None crashed it)
CURSOR = Style(reverse=True)
KEY_MOST = 40  # cells the key column takes at most
FLAGS_KEEP = 14  # cells the flags column keeps before a long key takes more than three fifths ("!outside-range")
SEVERITY_MARK = {"stop": "!", "warn": "?"}  # read without colour: '!' do not use unseen, '?' worth a look


def short_flags(codes: list[str], width: int) -> str:
    """Flags marked by severity ('!' stop, '?' warn), stop first; those that do not fit are counted ('+2')."""
    marked = [SEVERITY_MARK[SEVERITY[code]] + code for code in codes]
    shown: list[str] = []
    for i, item in enumerate(marked):
        rest = len(marked) - i - 1
        tail = f" +{rest}" if rest else ""
        if cell_len(" ".join([*shown, item]) + tail) <= width:
            shown.append(item)
            continue
        more = f"+{len(marked) - len(shown)}"
        while shown and cell_len(" ".join([*shown, more])) > width:
            shown.pop()
            more = f"+{len(marked) - len(shown)}"
        if shown:
            return " ".join([*shown, more])
        # not even the first whole: it is shown cut, and counts as shown
        others = len(marked) - 1
        return pad(marked[0], width - len(f" +{others}")) + f" +{others}" if others else pad(marked[0], width)
    return " ".join(shown)


def stop_room(codes: list[str]) -> int:
    """Cells ``short_flags`` needs to show every stop flag of ``codes`` (and count the others)."""
    stops = [SEVERITY_MARK["stop"] + code for code in codes if SEVERITY[code] == "stop"]
    others = len(codes) - len(stops)
    return cell_len(" ".join([*stops, *([f"+{others}"] if others else [])])) if stops else 0


def stale_proposal(session: TriageSession, s: int, listed: str) -> str | None:
    """This cycle's proposal for series ``s`` where it reads stale and the model ``listed`` (signed on other data)
    is another: the flags beside it are the proposal's ("loglog 47% !rising" read as the signed loglog's)."""
    chosen = int(session.results.chosen[s])
    if session.status[s] != "stale" or chosen < 0:
        return None
    proposal = session.results.names[chosen]
    return proposal if proposal != listed.rstrip("↺") else None


def proposal_lead(proposal: str, codes: list[str], width: int) -> str:
    """What a row's flags column begins with where its flags are ``proposal``'s, not the listed model's, in
    ``width`` cells: ``proposes poly5 `` (``→poly5 `` where short of room), the name never cut — the flags after it
    give way, counted (``!rising +1``): "proposes pol… !rising !stale" did not say which model was proposed."""
    least = cell_len(f" +{len(codes)}") if codes else 0  # the flags counted, where none of them fits
    return next((lead + " " for lead in (f"proposes {proposal}", f"→{proposal}")
                 if cell_len(lead) + least <= width), "")


class SeriesList(ScrollView, can_focus=True):
    """Virtualised list of the session's view; posts ``Highlighted`` when the cursor moves."""

    BINDINGS = [
        Binding("up", "cursor(-1)", "up", show=False),
        Binding("down", "cursor(1)", "down", show=False),
        Binding("pageup", "page(-1)", "page up", show=False),
        Binding("pagedown", "page(1)", "page down", show=False),
        Binding("home", "edge(-1)", "first", show=False),
        Binding("end", "edge(1)", "last", show=False),
    ]

    class Highlighted(Message):
        def __init__(self, series: int | None) -> None:
            super().__init__()
            self.series = series

    def __init__(self, session: TriageSession, **kwargs) -> None:
        super().__init__(**kwargs)
        self.session = session
        self._rows: dict[tuple, Strip] = {}  # a row's strip by what it shows: a reload redraws only new rows
        self._rows_of: tuple = (None, None)  # the results and diagnosis those rows were drawn from
        self._longest: tuple = (None, 0)  # (the session's keys, their longest label's length)
        self._count_width: tuple = (None, 5)  # (the session's results, the observations column's width)
        self._labels: tuple = (None, {})  # (what the rows on screen are, their key labels by series)

    def on_mount(self) -> None:
        self.reload()

    def on_resize(self) -> None:
        self.virtual_size = Size(self.scrollable_content_region.width, len(self.session.view) + 1)
        self.show_cursor()  # shorter (a notification's band below it, a smaller terminal): the cursor stays in view

    def reload(self) -> None:
        """The view changed (filter, sort, decisions): resize, redraw, keep the cursor visible."""
        # As wide as the list is: rows are cut to fit, so there is nothing to scroll sideways to.
        self.virtual_size = Size(self.scrollable_content_region.width, len(self.session.view) + 1)
        self.refresh()
        self.show_cursor()
        self.post_message(self.Highlighted(self.session.current))

    def show_cursor(self, rows: tuple[int, ...] | None = None) -> None:
        """Scroll the cursor into view; redraw the list, or only ``rows`` (positions) when nothing scrolled."""
        height = max(self.scrollable_content_region.height - 1, 1)
        row = self.session.cursor
        top = self.scroll_y
        if row < self.scroll_y:
            self.scroll_to(y=row, animate=False, immediate=True)
        elif row >= self.scroll_y + height:
            self.scroll_to(y=row - height + 1, animate=False, immediate=True)
        if rows is None or self.scroll_y != top:
            self.refresh()
            return
        width = self.scrollable_content_region.width
        for position in set(rows):  # the line under the header that shows list position ``position``
            self.refresh(Region(0, position - int(self.scroll_y) + 1, width, 1))

    def action_cursor(self, step: int) -> None:
        self._moved(lambda: self.session.move(step))

    def action_page(self, step: int) -> None:
        page = max(self.scrollable_content_region.height - 2, 1)
        self._moved(lambda: self.session.move(step * page))

    def action_edge(self, step: int) -> None:
        self._moved(lambda: self.session.move(step * len(self.session.view)))

    def _moved(self, change) -> None:
        before, listed, was = self.session.current, len(self.session.view), self.session.cursor
        change()
        if len(self.session.view) != listed:  # a pinned series let go: the rows below it moved up
            self.virtual_size = Size(self.scrollable_content_region.width, len(self.session.view) + 1)
            self.show_cursor()
        else:  # the rows stay where they were: only the cursor's old and new lines change
            self.show_cursor((was, self.session.cursor))
        if self.session.current != before:
            self.post_message(self.Highlighted(self.session.current))

    def columns(self, width: int) -> tuple[int, int]:
        """Widths of the key and flags columns for a line ``width`` wide: the key as wide as the longest label
        needs (12 to KEY_MOST cells) while the flags keep FLAGS_KEEP, else at least three fifths of the room."""
        fixed = 2 + 1 + self.count_width() + 1 + 7 + 1 + 5 + 2
        room = width - fixed
        needed = max(12, min(KEY_MOST, self.longest_label()))
        key = max(12, min(KEY_MOST, room * 3 // 5, needed), min(needed, room - FLAGS_KEEP))
        return key, max(room - key, 0)

    def count_width(self) -> int:
        """Cells of the observations column: the largest count's digits, 3 at least."""
        results = self.session.results
        if self._count_width[0] is not results:
            counts = results.data.counts
            most = int(counts.max()) if len(counts) else 0
            self._count_width = (results, max(3, len(str(most))))
        return self._count_width[1]

    def longest_label(self) -> int:
        """Cells of the longest series label as shown (40 when longer: the column is no wider): once per set of
        keys."""
        keys = self.session.keys
        if self._longest[0] is not keys:
            self._longest = (keys, longest_label([keys.columns[name] for name in keys.names], cap=KEY_MOST))
        return self._longest[1]

    def render_line(self, y: int) -> Strip:
        width = self.scrollable_content_region.width
        key_w, flags_w = self.columns(width)
        if y == 0:
            flags = next(h for h in ("flags (! stop, ? warn)", "flags !stop ?warn", "flags")
                         if len(h) <= flags_w or h == "flags")
            n_w = self.count_width()
            head = f"  {pad('series', key_w)} {'n':>{n_w}} {'model':<7} {'score':>5}  {pad(flags, flags_w)}"
            return Strip([Segment(head, Style(bold=True, underline=True))]).crop(0, width).extend_cell_length(width, PLAIN)
        row = y - 1 + int(self.scroll_y)
        session = self.session
        if not len(session.view):  # each sentence wrapped to the list's width (a command holds two paths)
            said = [line for sentence in session.empty_words()
                    for line in textwrap.wrap(sentence, max(width - 2, 20), break_on_hyphens=False)]
            text = f"  {said[row]}" if row < len(said) else ""
            return Strip([Segment(text, Style(dim=True))]).crop(0, width).extend_cell_length(width, PLAIN)
        if row >= len(session.view):
            return Strip.blank(width)
        s = int(session.view[row])
        news = session.news if s == session.current else None
        if self._rows_of[0] is not session.results or self._rows_of[1] is not session.diagnosis or len(self._rows) > 4096:
            self._rows, self._rows_of = {}, (session.results, session.diagnosis)  # new fit, or flags changed
        label = self.shown_labels(key_w)[s]
        shows = (s, width, int(session.status_code[s]), session.listed_model(s)[0],
                 news.get("digest") if news is not None else None, session.waiting, label,
                 session.spellings.differing(s))
        strip = self._rows.get(shows)
        if strip is None:
            strip = self._rows[shows] = self.row_strip(s, width, label, flags_w, news)
        if row == session.cursor:
            strip = strip.apply_style(CURSOR if self.has_focus else Style(bgcolor="#303030"))
        return strip

    def shown_labels(self, key_w: int) -> dict[int, str]:
        """Key labels of the series on screen, by series: no two of different series read the same (a long key
        is cut again where it differs from another on screen, ``key_labels``); made once per screenful."""
        top = int(self.scroll_y)
        series = tuple(self.session.view[top:top + max(self.scrollable_content_region.height, 1)].tolist())
        # found, missing: look-alikes told apart from the ledger's spelling, labels from the missing note's
        shows = (series, key_w, self.session.keys, self.session.spellings.found, self.session.missing_changes)
        if self._labels[0] != shows:
            labels = key_labels([self.session.label_parts(s) for s in series], key_w)
            self._labels = (shows, dict(zip(series, labels)))
        return self._labels[1]

    def row_strip(self, s: int, width: int, label: str, flags_w: int, news: dict | None) -> Strip:
        """Series ``s``'s row, ``width`` cells, without the cursor; ``label``: its key, as wide as its column."""
        session = self.session
        results = session.results
        status = session.status[s]
        name, score = session.listed_model(s)  # the model that stands (a stale series': the one signed)
        score_text = percent(score)
        flags = session.listed_flags(s)  # an override's: its own curve's
        severity = session.severity(s, flags)
        mark_style = DONE if status in ("accepted", "overridden") else STOP if status == "stale" else DIM
        segments = [
            Segment(f"{STATUS_MARK[status]} ", mark_style),
            Segment(f"{label} {results.data.counts[s]:>{self.count_width()}} "
                    f"{name:<7} {score_text:>5}  ", PLAIN),
        ]
        if news is not None:  # someone else just decided it: say who
            lead = "left list: " if session.waiting else "← "
            segments.append(Segment(pad(lead + describe(news, when=False), flags_w), NEWS))
        else:
            flag_style = STOP if severity == "stop" else WARN if severity else DIM
            other = session.accepted_other(s) or stale_proposal(session, s, name)  # the flags are this proposal's
            spelled = session.spellings.differing(s)  # like a ledger series spelled so (``spellings``)
            if spelled is not None:  # cut before any stop flag is: "≈flat line thing …" had pushed "!flat-price" out
                room = flags_w - stop_room(flags) - 1  # a space between it and the flags
                lead = cut(f"≈{spelled}", room) + " " if room >= 2 else "≈ "
            else:
                lead = proposal_lead(other, flags, flags_w) if other is not None else ""
            rest = flags_w - cell_len(lead)
            segments += [Segment(lead, WARN), Segment(pad(short_flags(flags, rest)
                                                          or ("" if lead else "—"), rest), flag_style)]
        return Strip(segments).crop(0, width).extend_cell_length(width, PLAIN)

    def on_focus(self) -> None:
        self.refresh()

    def on_blur(self) -> None:
        self.refresh()
