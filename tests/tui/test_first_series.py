"""The series on screen fitted first (``Reading.fit`` on a subset) carry the whole fit's numbers exactly.

The reference is ``fit_batch`` on the whole file (the fit the screen swaps in afterwards, and the one
``pricefold fit`` writes): every array of the subset's results must equal that fit's rows for those
series bit for bit, with and without controls, so what the screen shows first never moves later.
"""
from __future__ import annotations

import numpy as np
import pytest

from fitcore.results.source import read_source
from tui.factory import sample_source

ARRAYS = ("available", "reason", "cv_mse", "cv_se", "r2", "q2", "price_lo", "price_hi", "mid", "half", "basis_mid",
          "basis_half", "smear", "sigma2", "df", "coef", "chosen", "plan_price", "plan_volume", "plan_lo", "plan_hi",
          "plan_elasticity", "revenue_price", "top_cook")


@pytest.mark.parametrize("controls, season", [((), 0), (("promo",), 1)])
def test_a_subset_fit_equals_the_whole_fit_on_those_series(controls, season):
    reading = read_source(sample_source(controls, season))
    whole, whole_flags = reading.fit()
    data = reading.data
    promo = data.controls.get("promo")
    constant = [s for s in range(data.n_series) if promo is not None
                and np.ptp(promo[data.offsets[s]:data.offsets[s + 1]]) == 0]
    picked = np.unique(np.r_[[0, 7, 31, data.n_series - 1], constant[:2]]).astype(np.int64)
    part, part_flags = reading.fit(series=picked)
    assert part.n_series == len(picked)
    assert [part.data.key_of(i) for i in range(len(picked))] == [data.key_of(int(s)) for s in picked]
    assert part.data.fingerprints == [whole.data.fingerprint_of(int(s)) for s in picked]
    for name in ARRAYS:
        np.testing.assert_array_equal(np.asarray(getattr(part, name)), np.asarray(getattr(whole, name))[picked],
                                      err_msg=name)
    for i, s in enumerate(picked.tolist()):
        np.testing.assert_array_equal(part.folds_of(i), whole.folds_of(s))
        top, whole_top = int(part.top_row[i]), int(whole.top_row[s])  # a row of the dataset: the same input line
        assert (top < 0 and whole_top < 0) or part.data.line[top] == data.line[whole_top]
    np.testing.assert_array_equal(part_flags.raised, whole_flags.raised[picked])
    if controls:
        np.testing.assert_array_equal(np.asarray(part.controls.coef), np.asarray(whole.controls.coef)[picked])
        np.testing.assert_array_equal(np.asarray(part.controls.plan), np.asarray(whole.controls.plan)[picked])
