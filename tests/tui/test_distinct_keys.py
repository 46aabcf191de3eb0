"""Series whose cut keys would read the same are cut again where they differ (``fitcore.widths.distinct_keys``):
in the list, the evidence title, ``pricefold show``; an escape form is never cut; a name not in NFC form is
told from its NFC twin."""
from __future__ import annotations

import itertools
import unicodedata

import numpy as np
import pytest
from rich.cells import cell_len

from fitcore.text import ESCAPE, clean, reveal_unnormalised
from fitcore.widths import cells, cut_end, cut_middle, distinct_keys, fit_key, last
from tests.tui.conftest import all_listed, demand_source, listed_keys, make_app, show_rows
from tui.cells import key_labels
from tui.widgets.evidence import EvidencePanel

# invented: products that differ only in their middle, regions that differ only in their middle (a trial's
# "premium o…il 500 ml · Region wi…ong name" twice)
PRODUCTS = ["premium olive oil 500 ml", "premium orange blossom oil 500 ml", "premium organic seed oil 500 ml"]
REGIONS = ["Region with a very long name", "Region with another long name"]
TWINS = list(itertools.product(PRODUCTS, REGIONS))
SEP = " · "


def reads(label: str) -> str:
    return unicodedata.normalize("NFC", label)


@pytest.mark.parametrize("width", range(8, 60))
def test_keys_that_differ_in_the_middle_read_differently_at_every_width(width):
    labels = key_labels(TWINS, width)
    assert all(cell_len(label) == width for label in labels)
    assert len({reads(label) for label in labels}) == len(TWINS), labels


def test_a_key_that_does_not_clash_is_cut_as_before():
    keys = [("premium olive oil 500 ml", "North"), ("tea", "South")]
    assert distinct_keys(keys, 16, SEP, cells) == [fit_key(key, 16, SEP, cells) for key in keys]
    assert distinct_keys(keys, 16, SEP, cells)[0] == "premi…ml · North"


@pytest.mark.parametrize("width", range(6, 40))
def test_random_near_twins_read_differently(width):
    rng = np.random.default_rng(width)
    base = "".join(rng.choice(list("abc def"), 50))
    keys = {(base[:i] + ch + base[i + 1:],) for i in rng.integers(0, 50, 40) for ch in "xyz"}
    keys = sorted(keys)
    labels = distinct_keys(keys, width, SEP, cells)
    assert all(cells(label) <= width for label in labels)
    assert len(set(labels)) == len(keys), labels


def test_nfc_twins_read_differently_and_only_where_both_are_shown():
    composed, decomposed = "caf\u00e9 crème 250 g", unicodedata.normalize("NFD", "caf\u00e9 crème 250 g")
    assert composed != decomposed and reads(composed) == reads(decomposed)
    for width in (8, 12, 20, 40):
        labels = distinct_keys([(composed, "North"), (decomposed, "North")], width, SEP, cells)
        assert reads(labels[0]) != reads(labels[1]), labels
    full = distinct_keys([(composed,), (decomposed,)], 40, SEP, cells)
    assert full == [composed, "cafe⟨U+0301⟩ cre⟨U+0300⟩me 250 g"]  # the non-NFC one shows its accents
    assert distinct_keys([(decomposed,), ("tea",)], 40, SEP, cells) == [decomposed, "tea"]  # alone: as it is
    assert reveal_unnormalised("plain") == "plain" and reveal_unnormalised(composed) == composed


def test_jamo_and_singletons_are_revealed():
    hangul = "\ud55c\uae00"  # two syllables, NFC
    jamo = unicodedata.normalize("NFD", hangul)
    assert reads(reveal_unnormalised(jamo)) != hangul
    assert reveal_unnormalised("\u212b") == "⟨U+212B⟩"  # ANGSTROM SIGN: NFC makes it Å


SHOWN = clean("nosuch\u202eevil\n2 and \u2066more\u2069 text")  # escape forms and a picture


@pytest.mark.parametrize("width", range(3, 45))
def test_no_cut_splits_an_escape_form(width):
    for cut in (cut_end(SHOWN, width, cells), last(SHOWN, width, cells), cut_middle(SHOWN, width, cells)):
        assert cells(cut) <= width
        pieces = cut.split("…")
        for piece in pieces:  # every ⟨ starts a whole form, every ⟩ ends one
            assert piece.count("⟨") == piece.count("⟩") == len(ESCAPE.findall(piece)), cut


def test_a_difference_inside_an_escape_form_shows_the_whole_form():
    keys = [(clean(f"a long product name here {ch} and more words"),) for ch in ("\u202e", "\u202d")]
    for width in range(10, 30):
        labels = distinct_keys(keys, width, SEP, cells)
        assert labels[0] != labels[1]
        for label in labels:
            for piece in label.split("…"):
                assert piece.count("⟨") == piece.count("⟩") == len(ESCAPE.findall(piece)), labels


def twins_source(tmp_path):
    return demand_source(tmp_path / "twins.csv", TWINS, "region", seed=2)


@pytest.mark.parametrize("size", [(80, 24), (100, 30)])
async def test_the_list_and_the_title_read_differently(tmp_path, size):
    app = make_app(tmp_path / "ledger.jsonl", twins_source(tmp_path))
    async with app.run_test(size=size) as pilot:
        session = await all_listed(app, pilot)
        keys = listed_keys(app, len(TWINS))
        assert len({reads(key) for key in keys}) == len(TWINS), keys
        titles = set()
        for _ in TWINS:
            titles.add(app.screen.query_one(EvidencePanel).title_text(session.current).plain.splitlines()[0])
            await pilot.press("down")
        assert len(titles) == len(TWINS), titles


def test_show_reads_differently(tmp_path, capsys):
    rows = show_rows(capsys, twins_source(tmp_path), tmp_path / "twins.json")
    assert len(rows) == len(TWINS) and len({row[:40] for row in rows}) == len(TWINS), rows


@pytest.mark.parametrize("width", range(20, 60))
def test_a_revealed_mark_stays_in_view_when_another_part_tells_the_rest_apart(width):
    """Round one shows 'cafe⟨U+0301⟩' beside 'café'; the two decomposed rows then read alike by their cut
    regions: cut again there, the mark stayed cut away ('cafe…oir 250 g', the accent's meaning lost).  Below
    28 cells the product's share cannot hold 'cafe⟨U+0301⟩…' whole (an escape form is never cut): 'cafe…'."""
    decomposed = unicodedata.normalize("NFD", "caf\u00e9 noir 250 g")
    keys = [(name, region) for name in ("caf\u00e9 noir 250 g", decomposed) for region in REGIONS]
    labels = distinct_keys(keys, width, SEP, cells)
    assert len({reads(label) for label in labels}) == 4, labels
    assert all("⟨U+0301⟩" in label for label in labels[2:]) or width < 28, labels


def test_a_part_read_alike_in_another_row_is_revealed_whatever_the_other_parts():
    """A trial: 'café · East' (decomposed) beside 'café · North' (composed) read as one product in two regions,
    and 'bananas 1 kg · East ' beside 'bananas 1 kg · East' read the same once padded: rows compared whole, the
    part that reads alike was not looked at."""
    decomposed = unicodedata.normalize("NFD", "caf\u00e9")
    keys = [("caf\u00e9", "North"), (decomposed, "East"), ("bananas 1 kg", "East"), ("bananas 1 kg", "East ")]
    for width in (40, 30):
        labels = distinct_keys(keys, width, SEP, cells)
        assert labels == ["café · North", "cafe⟨U+0301⟩ · East", "bananas 1 kg · East",
                          "bananas 1 kg · East⟨U+0020⟩"], labels
    assert distinct_keys([(decomposed, "East"), ("tea", "South ")], 40, SEP, cells) == [
        f"{decomposed} · East", "tea · South "]  # nothing reads like them: as they are


@pytest.mark.parametrize("width", range(17, 20))
def test_a_revealed_mark_cut_for_room_keeps_its_whole_escape_form(width):
    """'cafe⟨U+0301⟩' given 9 to 11 cells: the cut kept 'cafe' and dropped the form ('cafe… · North', the
    accent's meaning lost); now the form stays whole and the start gives way ('…fe⟨U+0301⟩ · North')."""
    decomposed = unicodedata.normalize("NFD", "caf\u00e9")
    labels = distinct_keys([("caf\u00e9", "North"), (decomposed, "North")], width, SEP, cells)
    assert labels[0] == "café · North" and labels[1].endswith("⟨U+0301⟩ · North"), labels
