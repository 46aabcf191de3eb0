"""A bulk command's note in the report's bulk table (``signoff.bulk_groups``): the note every record carries, and
where they differ — a carry notes each series' own plan price move — how many carry one and an example, not the
first series' note as if it were all of theirs (a trial's report gave 194 carried series "to a new plan price:
1.46 → 1.65")."""
from __future__ import annotations

from fitcore.ledger.signoff import bulk_groups


def _carries(notes):
    return [{"seq": i + 1, "action": "carry", "analyst": "bo", "os_user": "bo", "results": "ab" * 32,
             "at": f"2026-12-05T10:00:0{i}.000Z", "note": note} for i, note in enumerate(notes)]


def test_a_note_shared_by_every_record_is_the_groups_and_differing_ones_are_said_as_such():
    [same], _ = bulk_groups(_carries(["cycle 2", "cycle 2", "cycle 2"]))
    assert (same.action, same.count, same.note) == ("carry", 3, "cycle 2")
    [apart], seqs = bulk_groups(_carries(["", "to a new plan price: 1.46 → 1.65", "to a new plan price: 2.10 → 1.99"]))
    assert apart.count == 3 and seqs == {1, 2, 3}
    assert apart.note == "a note of its own on 2 of the 3 series, e.g. to a new plan price: 1.46 → 1.65"
