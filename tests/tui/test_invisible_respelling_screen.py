"""Series that look like a ledger series under a spelling that differs only where it does not show (another
Unicode form, a space at an end): the row, its ≈ mark and the evidence tell the two spellings apart, the one not
in NFC form by its marks' code points (``cre⟨U+0300⟩me``) and a space at an end as ``⟨U+0020⟩``.

The ledger (written directly: holds) has 'crème cocoa 250 g' composed, 'crème brûlée 100 g' decomposed,
'bananas 1 kg · East' and 'tea 250 g · North'; the results spell the first decomposed, the second composed and the
region 'East ' with a trailing space, and share the tea."""
from __future__ import annotations

import unicodedata


from fitcore import ledger

from .conftest import ANA, demand_source, make_app, on_series, screen_text, until

COCOA, BRULEE = "crème cocoa 250 g", "crème brûlée 100 g"  # invented products, composed
LEDGER_KEYS = [(COCOA, "North"), (unicodedata.normalize("NFD", BRULEE), "North"), ("bananas 1 kg", "East"),
               ("tea 250 g", "North")]
RESULT_KEYS = [(unicodedata.normalize("NFD", COCOA), "North"), (BRULEE, "North"), ("bananas 1 kg", "East "),
               ("tea 250 g", "North")]


def source(tmp_path):
    return demand_source(tmp_path / "next.csv", RESULT_KEYS, "region", seed=3, prices=(1, 3), n=30,
                         line=(500, 120, 8))


def held(path) -> None:
    ledger.append(path, [ledger.Entry(series={"product": p, "region": r}, action="hold", fingerprint="f",
                                      results="ab" * 32) for p, r in LEDGER_KEYS], ANA)


async def test_the_row_its_mark_and_the_evidence_tell_invisible_respellings_apart(ledger_path, tmp_path):
    """Before: 'crème cocoa 250 g · North … ≈crème cocoa 250 g', 'bananas 1 kg · East … ≈East', and the evidence
    'product "crème cocoa 250 g" for "crème cocoa 250 g" in another Unicode form'."""
    held(ledger_path)
    app = make_app(ledger_path, source(tmp_path))
    async with app.run_test(size=(100, 30)) as pilot:
        s = await on_series(app, pilot, {"product": "bananas 1 kg", "region": "East "})
        rows = {line[2:].split(" ")[0]: line for line in screen_text(app).splitlines() if line[2:4] in ("cr", "ba")}
        assert "cre⟨U+0300⟩me cocoa 250 g · North" in rows["cre⟨U+0300⟩me"] and \
            "≈crème cocoa 250 g" in rows["cre⟨U+0300⟩me"], rows
        assert "crème brûlée 100 g · North" in rows["crème"] and "≈cre⟨U+0300⟩me bru⟨U+0302⟩" in rows["crème"], rows
        assert "bananas 1 kg · East⟨U+0020⟩" in rows["bananas"] and "≈East " in rows["bananas"], rows
        evidence = app.screen.evidence
        await until(pilot, lambda: evidence.series == s and not evidence.has_class("catching-up"))
        said = " ".join(str(evidence.query_one("#ev-flags").render()).split())
        assert said.startswith("≈ Spelled otherwise: bananas 1 kg · East⟨U+0020⟩ looks like bananas 1 kg · East in "
                               'ledger.jsonl under another spelling (region "East⟨U+0020⟩" for "East"), '), said
        s = await on_series(app, pilot, {"product": unicodedata.normalize("NFD", COCOA), "region": "North"})
        await until(pilot, lambda: evidence.series == s and not evidence.has_class("catching-up"))
        said = " ".join(str(evidence.query_one("#ev-flags").render()).split())
        assert said.startswith("≈ Spelled otherwise: cre⟨U+0300⟩me cocoa 250 g · North looks like crème cocoa 250 g · "
                               'North in ledger.jsonl under another spelling (product "cre⟨U+0300⟩me cocoa 250 g" for '
                               '"crème cocoa 250 g" in another Unicode form), '), said
