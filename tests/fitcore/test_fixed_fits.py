"""Restructuring must not move a number: a fixed set of fits against their recorded outputs.

See ``tests/reference/fixed_fits.py`` for what is fitted and how to re-record
(only when a change of numbers is intended).  Tolerance: 1e-11 relative
(absolute below 1e-3): a few units in the last place of the quantities
involved, since vectorised exp/log may differ by an ulp between CPUs.
"""
from __future__ import annotations

import pytest

from tests.reference.fixed_fits import FITS, differences, outputs, recorded


@pytest.fixture(scope="module")
def before():
    return recorded()


@pytest.mark.parametrize("name", list(FITS))
def test_fixed_fit_is_unchanged(before, name):
    found = differences(before[name], outputs(name))
    assert not found, f"{len(found)} differences, first: " + "; ".join(found[:5])


def test_the_comparison_catches_a_moved_number(before):
    """The check itself can fail: one coefficient nudged by 1e-9 relative is found."""
    changed = outputs("nist")
    cand = next(c for c in changed["json"][0]["candidates"] if c["available"] and c["coef"])
    cand["coef"][0] *= 1 + 1e-9
    assert differences(before["nist"], changed)
