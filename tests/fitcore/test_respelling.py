"""``fitcore.ledger.respelling``: results' series new to a ledger that look like its missing series under another
spelling (case, Unicode form, white space), and nothing more."""
from __future__ import annotations

import unicodedata

import numpy as np

from fitcore.ledger.respelling import LooseIndex, loose, respellings

LEDGER = [{"product": "salt", "region": "North"}, {"product": "salt", "region": "East"},
          {"product": "Café crème", "region": "South"}, {"product": "tea", "region": "North"}]


def key(product: str, region: str) -> dict:
    return {"product": product, "region": region}


def test_case_unicode_form_and_white_space_read_alike_and_nothing_else():
    decomposed = unicodedata.normalize("NFD", "Café crème")
    assert decomposed != "Café crème"
    assert loose("North") == loose("north") == loose("  NORTH ") == loose("North\u00a0") == loose("Ｎｏｒｔｈ")
    assert loose(decomposed) == loose("Café crème") == loose("CAFÉ   CRÈME")
    assert loose("Straße") == loose("STRASSE")  # case folding, not lower-casing
    for other in ("Cafe crème", "Nort", "North-", "No rth", "North\u200b"):  # accents, letters, marks, invisibles
        assert loose(other) not in (loose("Café crème"), loose("North")), other


def test_respelled_series_pair_with_the_ledger_series_missing_from_the_results():
    results = [key("salt", "north"), key("salt", "East"), key(unicodedata.normalize("NFD", "Café crème"), "South "),
               key("tea", "North"), key("pepper", "North")]  # pepper: a new product, spelled like nothing
    found = respellings(results, LEDGER)
    assert found.results.tolist() == [0, 2] and found.ledger.tolist() == [0, 2] and found.alike.tolist() == [1, 1]
    assert found.new == 3 and found.unmatched == 1  # salt·north, Café·South, pepper
    assert found.looks_like() == {0: 0, 2: 2}
    assert found.said("L.jsonl") == ('2 series in these results look like series in L.jsonl under another spelling '
                                     '(region "north" for "North", …)')
    one = respellings([results[2], *results[3:]], LEDGER)
    assert one.said("L", "signed series") == ('1 series in these results looks like a signed series in L under another '
                                              'spelling (product "Cafe⟨U+0301⟩ cre⟨U+0300⟩me" for "Café crème" in '
                                              'another Unicode form, region "South⟨U+0020⟩" for "South")')


def test_nothing_is_said_where_nothing_is_new_or_nothing_is_missing():
    assert respellings(LEDGER, LEDGER).said() is None and respellings(LEDGER, LEDGER).new == 0
    grown = respellings([*LEDGER, key("SALT", "north")], LEDGER)  # every ledger series is there: none missing
    assert len(grown) == 0 and grown.new == 1 and grown.said() is None
    assert len(respellings([key("salt", "north")], [])) == 0  # an empty ledger


def test_a_ledger_series_present_exactly_is_not_missing():
    """Results holding both North and north: the ledger's North is in them, so north is merely new."""
    found = respellings([key("salt", "North"), key("salt", "north")], LEDGER[:1])
    assert len(found) == 0 and found.new == 1


def test_colliding_spellings_in_the_ledger_pair_with_the_first_and_count_the_others():
    """The ledger already holds two spellings of one series (North, north), neither in the results: NORTH is one
    respelling, paired with the first in the ledger's order; two results' spellings of one ledger series each count."""
    ledger = [key("salt", "north"), key("tea", "East"), key("salt", "North")]
    found = respellings([key("salt", "NORTH"), key("tea", "east"), key("tea", " EAST")], ledger)
    assert found.results.tolist() == [0, 1, 2] and found.ledger.tolist() == [0, 1, 1]
    assert found.alike.tolist() == [2, 1, 1]


def test_ledger_series_keyed_by_other_columns_are_passed_over():
    ledger = [{"product": "salt"}, {"product": "salt", "channel": "web"}]
    assert len(respellings([key("SALT", "North")], ledger)) == 0
    assert respellings([{"product": "SALT"}], ledger).ledger.tolist() == [0]


def test_loose_index_pairs_every_match():
    index = LooseIndex([("salt", "north"), ("SALT", "North "), ("tea", "East")], [7, 9, 11])
    found, probe = index.pairs([("Salt", "NORTH"), ("pepper", "North")], [40, 41])
    assert sorted(zip(found.tolist(), probe.tolist())) == [(7, 40), (9, 40)]
    assert np.asarray(found).dtype == np.int64 and len(index) == 3


def test_a_respelling_that_differs_only_invisibly_reads_otherwise():
    """A trial read 'product "crème cocoa 250 g" for "crème cocoa 250 g" in another Unicode form' and
    'region "East " for "East"': the one not in NFC form, and spaces at the ends, are now shown by code point."""
    from fitcore.ledger.respelling import spelled
    decomposed = unicodedata.normalize("NFD", "crème cocoa 250 g")
    assert spelled(("product",), (decomposed,), ("crème cocoa 250 g",)) == \
        'product "cre⟨U+0300⟩me cocoa 250 g" for "crème cocoa 250 g" in another Unicode form'
    assert spelled(("product",), ("crème cocoa 250 g",), (decomposed,)) == \
        'product "crème cocoa 250 g" for "cre⟨U+0300⟩me cocoa 250 g" in another Unicode form'
    assert spelled(("product", "region"), ("tea", "East "), ("tea", "East")) == 'region "East⟨U+0020⟩" for "East"'
    assert spelled(("region",), ("north",), ("North",)) == 'region "north" for "North"'  # visible: as it is


def test_every_ledger_spelling_a_look_alike_pairs_with_is_kept_and_the_missing_note_names_another_first():
    """A trial: '3 signed series in L are not in these results (salt · North, …)' named as its example a series
    the results hold as 'salt · north', said apart as a look-alike; the example is now one the results do not hold
    in any spelling, and the note says how many are there under another (every ledger spelling some results'
    series reads like loosely, the collisions' others too)."""
    from fitcore.ledger.missing import Missing
    ledger = [key("salt", "north"), key("tea", "East"), key("salt", "North"), key("oats", "East")]
    results = [key("salt", "NORTH"), key("tea", "east")]
    found = respellings(results, ledger)
    assert found.ledger.tolist() == [0, 1] and found.alike.tolist() == [2, 1]  # salt·NORTH: salt·north, salt·North
    gone = Missing(tuple(ledger), columns=("product", "region"))
    assert gone.said("L") == "4 signed series in L are not in these results (salt · north, …)"
    some = gone.beside(results)
    assert some.alike == (True, True, True, False) and len(some) == 4
    assert some.said("L") == ("4 signed series in L are not in these results (oats · East, …; 3 of them present only "
                              "under another spelling)")
    every = Missing(tuple(ledger[:3]), columns=("product", "region")).beside([key("SALT", "north "),
                                                                              key("TEA", "East")])
    assert every.said("L") == ("3 signed series in L are not in these results (each present only under another "
                               "spelling: salt · north, …)")
    assert Missing((ledger[1],)).beside([key("tea", " East")]).said("L") == \
        "1 signed series in L is not in these results (present only under another spelling: tea · East)"
    assert gone.beside([]) is gone
    assert gone.beside([key("pepper", "East")]).alike == (False,) * 4


def test_a_look_alike_is_shown_beside_the_ledgers_spelling_wherever_it_is_shown():
    """The screen's row, ``show``'s list and the sentence give a look-alike one form: told apart from the ledger's
    spelling it reads like, whatever else is listed beside it (before: ``show`` told ``South `` apart only where
    another series spelled ``South`` happened to be listed)."""
    from fitcore.ledger.respelling import beside, ledger_spelling
    decomposed = unicodedata.normalize("NFD", "crème")
    assert beside(("tea", "South "), ("tea", "South")) == (("tea", "South⟨U+0020⟩"), ("tea", "South"))
    assert beside((decomposed, "East"), ("crème", "East")) == (("cre⟨U+0300⟩me", "East"), ("crème", "East"))
    assert ledger_spelling(("tea", "South "), ("tea", "South")) == "South"
    assert ledger_spelling(("crème", "north"), (decomposed, "North")) == "cre⟨U+0300⟩me · North"
    assert beside(("salt", "north"), ("salt", "North")) == (("salt", "north"), ("salt", "North"))


def test_the_missing_notes_example_is_told_apart_from_the_results_series_it_reads_like():
    """Where the ledger's spelling is the decomposed one and the results hold the composed (or a space differs), the
    note's example reads as the results' series would: told apart by code point, whichever side is odd (before:
    'present only under another spelling: crème · North' named the results' own spelling, to the eye)."""
    from fitcore.ledger.missing import Missing
    decomposed = unicodedata.normalize("NFD", "crème")
    gone = Missing((key(decomposed, "North"), key("tea", "East")), columns=("product", "region"))
    both = gone.beside([key("crème", "North"), key("tea", "East ")])
    assert both.twins == (("crème", "North"), ("tea", "East "))
    assert both.said("L") == ("2 signed series in L are not in these results (each present only under another "
                              "spelling: cre⟨U+0300⟩me · North, …)")
    assert both.shown() == [(decomposed, "North"), ("tea", "East")]  # cleaned, not told apart: the caller's list does
    one = Missing((key("tea", "East"),), columns=("product", "region")).beside([key("tea", "East ")])
    assert one.said("L") == ("1 signed series in L is not in these results (present only under another spelling: "
                             "tea · East)")
