"""Flag sentences for many series at once (``fitcore.review.sentence_columns``) say what the sentence of
each series says, character for character; the numbers in them are formatted as Python's own
``format`` formats them (``formats.fmt``, ``money``, ``pct`` are f-strings), thousands separators
included."""
from __future__ import annotations

import numpy as np
import pytest

import fitcore
from fitcore.fit.settings import FitSettings
from fitcore.review import formats as F
from fitcore.review import sentences as S
from fitcore.review.flags import CODES, diagnose
from fitcore.review.sentence_columns import fill, flag_sentences, fmts, moneys, pcts
from tests.conftest import random_dataset

EDGES = [0.0, -0.0, 999.95, 999.949999, 99.995, 0.99995, 0.999, 1.0, 1000.0, -999.95, 1e300, -1e300, 5e-324,
         np.nan, np.inf, -np.inf, 0.0995, 0.1, 0.09999, 123456789.5, -0.4, -0.5, 0.5, 1.5, 2.5, 100.0, 99.99,
         -1234.5678, 1e15 + 0.5, 12345678901234567890.0]


def numbers() -> np.ndarray:
    rng = np.random.default_rng(0)
    return np.concatenate([rng.normal(size=3000) * 10.0 ** rng.integers(-8, 25, 3000),
                           np.round(rng.normal(size=500) * 1e4), EDGES])


def test_numbers_are_formatted_as_pythons_format_formats_them():
    x = numbers()
    assert list(fmts(x)) == [F.fmt(v) for v in x]
    assert list(moneys(x)) == [F.money(v) for v in x]
    shares = np.concatenate([np.random.default_rng(1).normal(size=2000), [0.005, 0.015, 0.025, -0.005, np.nan]])
    assert pcts(shares).to_pylist() == [F.pct(v) for v in shares]
    assert "1,234,567" in list(fmts(np.array([1234567.0]))) and moneys(np.array([-1234.5]))[0] == "-1,234.50"


def test_a_template_is_filled_as_str_format_fills_it():
    names = np.array(["a {b}", "ü", ""], dtype=object)
    assert fill("x {n}: {m} y", n=names, m="fixed").to_pylist() == \
        ["x {n}: {m} y".format(n=n, m="fixed") for n in names]
    with pytest.raises(ValueError):
        fill("{n:.2f}", n=names)


@pytest.mark.parametrize("plan", [None, 40.0])
def test_every_flags_sentences_equal_each_series_own(plan):
    data = random_dataset(21, n_series=600, n_range=(6, 40))
    results = fitcore.fit_batch(data, FitSettings(), plan_price=plan)
    diagnosis = diagnose(results)
    written = 0
    for i, code in enumerate(CODES):
        raised = np.flatnonzero(diagnosis.raised[:, i])
        got = flag_sentences(diagnosis, raised, code).to_pylist()
        assert got == [S.sentence(diagnosis, s, code) for s in raised.tolist()]
        written += len(raised) if code in ("near-tie", "weak-fit") else 0
    assert written > 50  # the column-wise sentences were exercised


def test_huge_numbers_and_shares_read_as_numbers():
    """A thirty-digit volume ran into the next column and "-0%" read as a sign of something: from 1e9 up a
    number has three significant digits, as below 1; a share is grouped and never negative zero (common
    practice in printed tables)."""
    assert [F.fmt(v) for v in (646_903_142_798.0, -2.5e9, 8.9e47, 999_999_999.0)] == \
        ["6.47e+11", "-2.5e+09", "8.9e+47", "999,999,999"]
    assert [F.pct(v) for v in (-0.004, 0.004, 189.0, -12.26)] == ["0%", "0%", "18,900%", "-1,226%"]
    assert pcts(np.array([-0.004, 189.0])).to_pylist() == ["0%", "18,900%"]
    assert [F.two_places(v) for v in (-0.001, -1.466, 0.004)] == ["0.00", "-1.47", "0.00"]
    assert (F.span(877.0, 1205.0), F.span(-6752.0, 16270.0)) == ("877–1,205", "-6,752 to 16,270")
