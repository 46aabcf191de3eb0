"""The report opened in a real browser (headless Chromium, one start for the module).

What a reviewer sees: the counts, a row, hostile names shown literally, the charts; that no
request leaves the page and no policy violation is logged; that the page fits a phone and a
desktop; that the table reads without its script and sorts and filters with it.
"""
from __future__ import annotations

import json
import re
import struct

import pytest

from .browser import Browser, chromium_path
from .scenario import HOSTILE

CHROMIUM = chromium_path()
pytestmark = pytest.mark.skipif(CHROMIUM is None, reason="no Chromium installed (.ci/run installs Debian's chromium)")
WIDTHS = {"phone": (390, 844, True), "desktop": (1280, 900, False)}


@pytest.fixture(scope="module")
def browser():
    chromium = Browser(CHROMIUM)
    yield chromium
    chromium.close()


@pytest.fixture(scope="module")
def opened(browser, page):
    """The report in a desktop-sized tab: ``(session, url)``."""
    path, _ = page
    session = browser.page(*WIDTHS["desktop"])
    browser.open(session, path.as_uri())
    return session, path.as_uri()


def test_the_rendered_page_reads_right(browser, opened, signed):
    session, _ = opened
    text = browser.evaluate(session, "document.body.innerText")
    cards = browser.evaluate(session, "[...document.querySelectorAll('.cards li')].map(li => li.innerText)")
    results = json.loads(signed["results"].read_text())
    unflagged = sum(1 for s in results["series"] if not s["flags"] and s["chosen"])
    assert [c.replace("\n", " ") for c in cards] == [
        "183 series", f"{unflagged} accepted", "1 overridden", "1 held", f"{183 - unflagged - 2} pending", "0 stale"]
    row = browser.evaluate(session, "[...document.querySelectorAll('#decisions-table tbody tr')]"
                                    ".find(r => r.dataset.status === 'held').innerText")
    assert row.split("\t")[:3] == ["lemons 500 g · East", "held", "none (held; proposal poly1)"] and "ask the buyer" in row
    assert f"{HOSTILE[0]} · North" in text  # literally, as text: never run
    keys = browser.evaluate(session, "[...document.querySelectorAll('#decisions-table td.key')].map(c => c.innerText)")
    shown = "\u241b[2J\u241b]2;owned\u2407 wipe · North"  # escape and bell as their control pictures
    assert {"[/] [bold]x · North", shown, f"{HOSTILE[0]} · North"} <= set(keys)
    assert "[red]not markup[/]" in text
    assert shown in text and "\x1b" not in text
    assert browser.evaluate(session, "window.__pwned === undefined && document.title.indexOf('owned') < 0")
    charts = browser.evaluate(session, "[...document.querySelectorAll('article.exception svg')]"
                                       ".map(s => s.getBoundingClientRect().width)")
    assert len(charts) == browser.evaluate(session, "document.querySelectorAll('article.exception').length") > 3
    assert all(width > 300 for width in charts)


def test_no_request_leaves_the_page_and_nothing_is_refused(browser, opened):
    session, url = opened
    browser.evaluate(session, "document.querySelector('#decisions-table th button').click()")  # run the script
    requests = [e["params"]["request"]["url"] for e in browser.session_events(session, "Network.requestWillBeSent")]
    assert requests == [url]
    logged = [e["params"]["entry"]["text"] for e in browser.session_events(session, "Log.entryAdded")]
    thrown = browser.session_events(session, "Runtime.exceptionThrown")
    assert logged == [] and thrown == []  # a blocked style, script or load would be logged here


@pytest.mark.parametrize("name", list(WIDTHS))
def test_the_page_fits_the_screen(browser, page, name, tmp_path_factory):
    path, _ = page
    width, height, mobile = WIDTHS[name]
    session = browser.page(width, height, mobile)
    browser.open(session, path.as_uri())
    scroll, inner = browser.evaluate(session, "[document.documentElement.scrollWidth, innerWidth]")
    assert scroll <= inner == width
    wider = browser.evaluate(session, "[...document.querySelectorAll('body *')].filter(e => "
                                      "e.getBoundingClientRect().right > innerWidth + 1 && !e.closest('.wide')).length")
    assert wider == 0
    tables = browser.evaluate(session, "[...document.querySelectorAll('table.cards-small')]"
                                       ".filter(t => t.getBoundingClientRect().right > innerWidth + 1).length")
    assert tables == 0  # no sideways scrolling inside the decisions, people or candidate tables either
    shot = tmp_path_factory.mktemp("shots") / f"{name}.png"
    browser.evaluate(session, "document.querySelector('article.exception').scrollIntoView()")
    browser.screenshot(session, shot)
    assert struct.unpack(">II", shot.read_bytes()[16:24]) == (width, height)
    print(f"screenshot: {shot}")


def test_the_table_reads_without_its_script(browser, page):
    path, _ = page
    session = browser.page(*WIDTHS["desktop"], scripts=False)
    browser.open(session, path.as_uri())
    rows = browser.evaluate(session, "document.querySelectorAll('#decisions-table tbody tr').length")
    hidden = browser.evaluate(session, "document.getElementById('decisions-controls').hidden")
    assert rows > 10 and hidden


def test_sorting_and_filtering(browser, opened):
    session, _ = opened
    column = "[...document.querySelectorAll('#decisions-table tbody tr')].filter(r => !r.hidden)" \
             ".map(r => r.cells[3].dataset.sort)"
    browser.evaluate(session, "document.querySelectorAll('#decisions-table th button')[3].click()")
    prices = [float(v) for v in browser.evaluate(session, column) if v]
    assert prices == sorted(prices) and len(prices) > 10
    browser.evaluate(session, "document.querySelectorAll('#decisions-table th button')[3].click()")
    assert [float(v) for v in browser.evaluate(session, column) if v] == sorted(prices, reverse=True)
    browser.evaluate(session, "const i = document.querySelector('#decisions-controls input'); i.value = 'TABLE SALT';"
                              "i.dispatchEvent(new Event('input'))")
    shown = browser.evaluate(session, "[...document.querySelectorAll('#decisions-table tbody tr')]"
                                      ".filter(r => !r.hidden).map(r => r.cells[0].innerText)")
    assert sorted(shown) == ["table salt 1 kg · East", "table salt 1 kg · North", "table salt 1 kg · South"]
    assert browser.evaluate(session, "document.querySelector('#decisions-controls output').textContent").startswith(
        "3 of ")


@pytest.mark.parametrize("paper, inches", [("A4", 8.27), ("Letter", 8.5)])
def test_printed_pages_fit_the_paper_and_break_between_sections(browser, page, paper, inches):
    import base64
    path, _ = page
    width = int((inches - 2 * 14 / 25.4) * 96)  # the printable width at 96 CSS pixels an inch, 14 mm margins
    session = browser.page(width, 1000)
    browser.send("Emulation.setEmulatedMedia", {"media": "print"}, session=session)
    browser.open(session, path.as_uri())
    table = browser.evaluate(session, "document.getElementById('decisions-table').getBoundingClientRect().right")
    assert table <= width
    styles = browser.evaluate(session, "[getComputedStyle(document.getElementById('decisions')).breakBefore, "
                                       "getComputedStyle(document.querySelector('article.exception')).breakInside, "
                                       "getComputedStyle(document.getElementById('decisions-controls')).display]")
    assert styles == ["page", "avoid-page", "none"]
    pdf = base64.b64decode(browser.send("Page.printToPDF", {"paperWidth": inches, "paperHeight": 11.0},
                                        session=session)["data"])
    pages = len(re.findall(rb"/Type\s*/Page[^s]", pdf))
    # the summary, the decisions and one page at least per exception section (each kept whole)
    assert pdf.startswith(b"%PDF") and pages >= 2 + browser.evaluate(session, "document.querySelectorAll("
                                                                           "'article.exception').length")
