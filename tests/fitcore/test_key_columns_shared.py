"""``fitcore.ledger.key_columns``: results keyed by the ledger's columns that share not one of its series."""
from __future__ import annotations

from fitcore.ledger.key_columns import none_of_keys, none_shared
from fitcore.ledger.replay import series_id


def test_none_of_keys_says_only_a_non_empty_ledger_with_no_series_in_common():
    ledger_ids = {series_id({"product": "salt", "region": "North"}), series_id({"product": "salt", "region": "East"})}
    lower = [{"product": "salt", "region": "north"}, {"product": "salt", "region": "east"}]
    said = none_of_keys(lower, ledger_ids, "L.jsonl")
    assert said.startswith("none of the 2 series in L.jsonl is in these results")
    assert none_of_keys([*lower, {"region": "East", "product": "salt"}], ledger_ids) is None  # one shared
    assert none_of_keys(lower, set()) is None  # an empty ledger takes any series
    assert none_shared(False, 1_500, "L", "signed series").startswith("none of the 1,500 signed series in L ")
    assert none_shared(True, 1_500) is None
