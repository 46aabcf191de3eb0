"""Selection rules on hand-made CV results."""
from __future__ import annotations

import numpy as np
import pytest

from fitcore.fit.selection import choose

COMPLEXITY = np.array([1, 2, 3, 2])  # poly0, poly1, poly2, loglog


def pick(rule, mse, se, available=None):
    mse, se = np.array([mse], float), np.array([se], float)
    available = np.ones_like(mse, bool) if available is None else np.array([available])
    return int(choose(rule, mse, se, available, COMPLEXITY, np.array([100.0]))[0])


def test_one_se_takes_the_simplest_within_one_standard_error():
    # Best is poly2 (8 ± 1.5): poly1 at 9 is within 8 + 1.5, poly0 at 10 is not.
    assert pick("one-se", [10, 9, 8, 12], [1, 1, 1.5, 1]) == 1


def test_one_se_breaks_a_complexity_tie_by_lower_error():
    # poly1 and loglog both have 2 coefficients and both are within the band.
    assert pick("one-se", [20, 9.2, 8, 8.7], [1, 1, 1.5, 1]) == 3


def test_lowest_takes_the_lowest_error():
    assert pick("lowest", [10, 9, 8, 12], [1, 1, 1.5, 1]) == 2


def test_unavailable_candidates_are_never_chosen():
    assert pick("lowest", [10, 9, 1, 12], [1, 1, 1, 1], [True, True, False, True]) == 1
    assert pick("one-se", [10, 9, 1, 12], [1, 1, 1, 1], [False] * 4) == -1


def test_round_off_differences_count_as_ties():
    # Errors differing by 1e-12 of the variance are equal: the simpler one wins under "lowest" too.
    assert pick("lowest", [50, 1e-10, 0.9e-10, 50], [0, 0, 0, 0]) == 1


def test_unknown_rule_is_refused():
    with pytest.raises(ValueError, match="expected a rule"):
        pick("cheapest", [1, 2, 3, 4], [0, 0, 0, 0])


def rule_by_definition(rule, mse, se, available, complexity, tolerance):
    """One series, written from the rules' wording: the bar, then fewest coefficients, then lowest error."""
    candidates = [c for c in range(len(mse)) if available[c]]
    if not candidates:
        return -1
    best = min(candidates, key=lambda c: (mse[c], c))
    bar = mse[best] + (max(se[best], tolerance) if rule == "one-se" else tolerance)
    under = [c for c in candidates if mse[c] <= bar]
    return min(under, key=lambda c: (complexity[c], mse[c], c))


@pytest.mark.parametrize("rule", ["one-se", "lowest"])
def test_many_random_series_match_the_rules_written_out(rule):
    rng = np.random.default_rng(3)
    n = 2000
    mse = np.round(rng.uniform(1, 3, (n, 4)), 1)  # rounded: plenty of exact ties
    se = np.round(rng.uniform(0, 0.6, (n, 4)), 1)
    available = rng.random((n, 4)) > 0.2
    chosen = choose(rule, mse, se, available, COMPLEXITY, np.full(n, 100.0))
    expected = [rule_by_definition(rule, mse[s], se[s], available[s], COMPLEXITY, 1e-9 * 100.0) for s in range(n)]
    np.testing.assert_array_equal(chosen, expected)
