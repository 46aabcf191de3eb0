"""Where a curve rises with price (``review.rising``), checked against numpy outside pricefold's code.

References: numpy's ``Polynomial.deriv().roots()`` of each curve, one series at a time (numpy mapping the
price window onto [-1, 1] itself: ``domain``), and ``Polynomial.deriv()`` on a fine grid (2,000,001 points)
for the steepest slope; curves made with the roots of their derivative chosen, so the stretches are known
exactly; the bundled sample's rising series.  A test importing ``review.rising`` does so inside it, so the
sample's tests also run (and fail) on the grid code before it.
"""
from __future__ import annotations

from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest

import fitcore
from fitcore.fit.families import BY_NAME
from fitcore.review.candidate_checks import candidate_checks
from fitcore.review.flags import diagnose
from fitcore.review.formats import pct_beside
from fitcore.review.sentences import sentence
from fitcore.review.thresholds import Thresholds

Poly = np.polynomial.Polynomial
SAMPLE = Path(__file__).resolve().parents[2] / "sample"
POLY = BY_NAME["poly"]


def curves_with_slope_roots(roots, lead=1.0, mid=5.0, half=2.0):
    """Coefficients in t (1, 6) of the curve whose derivative in t is lead·Π(t − r), on the price window
    mid ± half; and the same curve as numpy's, in price (for the reference)."""
    in_t = (Poly.fromroots(roots) * lead).integ()
    coef = np.zeros((1, 6))
    coef[0, :len(in_t.coef)] = in_t.coef
    return coef, Poly(in_t.coef, domain=[mid - half, mid + half])


def one(family, coef, mid=5.0, half=2.0, lo=3.0, hi=7.0):
    """``rising`` of one curve in ``family``'s basis (window ``mid`` ± ``half``) over prices [lo, hi]."""
    from fitcore.review.rising import rising
    return rising(family, coef, *(np.array([v], dtype=float) for v in (mid, half, 1.0, lo, hi)))


def reference_stretches(curve: np.polynomial.Polynomial, lo: float, hi: float):
    """Stretches of [lo, hi] where ``curve`` rises, from numpy's roots of its derivative (real, simple)."""
    slope = curve.deriv()
    roots = slope.roots()
    cuts = np.concatenate([[lo], np.sort(roots[np.abs(roots.imag) < 1e-9].real.clip(lo, hi)), [hi]])
    pieces = [(a, b) for a, b in zip(cuts[:-1], cuts[1:]) if b > a and slope((a + b) / 2) > 0]
    joined = []
    for a, b in pieces:
        if joined and joined[-1][1] == a:
            joined[-1] = (joined[-1][0], b)
        else:
            joined.append((a, b))
    return joined


@pytest.mark.parametrize("roots, lead, expected", [
    ([-0.6, 0.2], -1.0, [(-0.6, 0.2)]),  # a cubic rising in the middle
    ([-0.6, 0.2], 1.0, [(-1.0, -0.6), (0.2, 1.0)]),  # and at both ends
    ([-0.8, -0.2, 0.4, 0.9], 1.0, [(-1.0, -0.8), (-0.2, 0.4), (0.9, 1.0)]),  # a quintic's three stretches
    ([-0.8, -0.2, 0.4, 0.9], -1.0, [(-0.8, -0.2), (0.4, 0.9)]),
    ([-1.5, 2.0], -1.0, [(-1.0, 1.0)]),  # roots outside the range: rising throughout
    ([0.3, 0.3, -2.0], -1.0, []),  # the slope touches 0 from below at 0.3: no stretch at all
    ([0.3, 0.3], -1.0, []),  # the same on a cubic (its slope's roots in closed form)
    ([0.3, 0.3], 1.0, [(-1.0, 1.0)]),
    ([0.3, 0.3, -2.0], 1.0, [(-1.0, 1.0)]),  # touches 0 from above: one stretch across the tangency
    ([0.3, 0.3, 0.3, 0.3], -1.0, []),  # a fourfold root (found only to ~1e-4): still no stretch
    ([-0.8, 0.4, 0.4, 0.9], -1.0, [(-0.8, 0.9)]),  # a tangency inside a stretch does not split it
])
def test_stretches_of_curves_made_with_known_slope_roots(roots, lead, expected):
    coef, in_price = curves_with_slope_roots(roots, lead)
    found = one(POLY, coef)
    prices = [(5 + 2 * a, 5 + 2 * b) for a, b in expected]
    assert found.count[0] == len(prices)
    got = list(zip(found.start[0, :len(prices)], found.stop[0, :len(prices)]))
    assert np.allclose(got, prices, rtol=0, atol=1e-9) if prices else got == []
    assert found.share[0] == pytest.approx(sum(b - a for a, b in prices) / 4, abs=1e-9)
    if not any(roots.count(r) > 1 for r in roots):  # numpy's roots of a double root split: simple roots only
        assert np.allclose(reference_stretches(in_price, 3.0, 7.0), prices, rtol=0, atol=1e-9)


def test_many_random_curves_agree_with_numpy_roots_one_by_one():
    """800 random curves of degree 0–5 (half of them made with four real slope roots) at once against numpy's
    roots series by series: the same stretches
    (to 1e-9 of the range), so the same share; and the steepest slope against a fine grid's."""
    from fitcore.review.rising import MAX_STRETCHES, rising
    rng = np.random.default_rng(36)
    n = 800
    coef = rng.normal(size=(n, 6)) * (np.arange(6) <= rng.integers(0, 6, n)[:, None])
    for s in range(0, n, 2):  # every other one: a quintic whose slope has four random roots near the range
        coef[s] = (Poly.fromroots(rng.uniform(-1.2, 1.2, 4)) * rng.choice([-1, 1])).integ(k=rng.normal()).coef
    mid, half = rng.uniform(1, 50, n), rng.uniform(0.1, 10, n)
    found = rising(POLY, coef, mid, half, np.full(n, np.nan), mid - half, mid + half)
    grid = np.linspace(-1, 1, 2_000_001)
    for s in range(n):
        curve = Poly(coef[s], domain=[mid[s] - half[s], mid[s] + half[s]])
        expected = reference_stretches(curve, mid[s] - half[s], mid[s] + half[s])
        k = found.count[s]
        assert k == len(expected), s
        assert np.allclose(list(zip(found.start[s, :k], found.stop[s, :k])), expected, rtol=0,
                           atol=1e-9 * half[s]) if k else not expected
        if k and s < 100:
            steepest = Poly(coef[s]).deriv()(grid).max() / half[s]
            assert found.steepest[s] == pytest.approx(steepest, rel=1e-9)
    assert (found.count > 1).sum() > 50 and found.count.max() == MAX_STRETCHES  # the cases were there


def test_log_families_are_monotone():
    for name, mid, half in (("loglog", np.log(21) / 2, np.log(7 / 3) / 2), ("semilog", 5.0, 2.0)):
        up, down = (one(BY_NAME[name], np.array([[2.0, e]]), mid, half) for e in (0.3, -0.3))
        assert up.count[0] == 1 and up.share[0] == pytest.approx(1.0) and down.count[0] == 0 and down.share[0] == 0


@pytest.fixture(scope="module")
def sample():
    from fitcore.data.loader import Columns, load
    from fitcore.data.plan import plan_prices
    data = load(SAMPLE / "wholesale.csv", Columns(segments=("region",), date="week"))
    results = fitcore.fit_batch(data, plan_price=plan_prices(data, SAMPLE / "plan.csv"))
    return results, diagnose(results)


def find(results, product, region):
    keys = results.data.keys
    return next(s for s in range(results.n_series) if keys["product"][s] == product and keys["region"][s] == region)


def test_the_sample_shares_are_numpys(sample):
    """Every chosen polynomial of the sample: the share as numpy's roots of its power-basis curve give it,
    and the flag exactly where that share is over 10% (the grid said 52% for 55.0%, 12% for 18.4%, and
    left a 10.3% unflagged)."""
    results, diagnosis = sample
    checked = 0
    for s in range(results.n_series):
        c = results.chosen[s]
        if c < 0 or results.candidates[c].family != "poly" or results.candidates[c].degree < 2:
            continue
        lo, hi = results.price_lo[s], results.price_hi[s]
        mid, half = results.basis_mid[s, c], results.basis_half[s, c]
        curve = Poly(results.coef[s, c, :results.candidates[c].complexity], domain=[mid - half, mid + half])
        stretches = reference_stretches(curve, lo, hi)
        share = sum(b - a for a, b in stretches) / (hi - lo)
        assert diagnosis.numbers["rising_share"][s] == pytest.approx(share, abs=1e-9)
        assert diagnosis.flagged("rising")[s] == (share > 0.10)
        checked += 1
    assert checked >= 10
    truffle = find(results, "truffle oil 250 ml", "North")
    assert diagnosis.numbers["rising_share"][truffle] == pytest.approx(0.550, abs=5e-4)
    coffee = find(results, "ground coffee 250 g", "South")
    assert diagnosis.flagged("rising")[coffee]


def test_the_sentence_names_the_stretches_and_rounds_without_crossing_the_bar(sample):
    results, diagnosis = sample
    said = sentence(diagnosis, find(results, "strawberries 400 g", "South"), "rising")
    assert "over 18% of the observed range, in two stretches: 2.82–2.96 and 3.76–3.91 (slope up to" in said
    said = sentence(diagnosis, find(results, "ground coffee 250 g", "South"), "rising")
    assert "over 10.3% of the observed range, in two stretches: 2.82–2.85 and 4.22–4.35" in said
    said = sentence(diagnosis, find(results, "truffle oil 250 ml", "North"), "rising")
    assert "over 55% of the observed range, within 7.18–9.17" in said
    said = sentence(diagnosis, find(results, "truffle oil 250 ml", "East"), "rising")
    assert "in three stretches: 6.74–7.00, 8.03–9.69 (the two longest) and 1 more" in said


def test_a_share_rounds_to_the_nearest_percent_never_to_the_bar():
    assert pct_beside(0.1296, 0.10) == "13%"
    assert pct_beside(0.1049, 0.10) == "10.5%"
    assert pct_beside(0.1000004, 0.10) == "10.001%"  # not "10.000%", read as the bar itself
    assert pct_beside(0.2999996, 0.30) == "29.999%"
    numbers = {"rising_share": np.array([0.1296]), "rising_from": np.array([[3.0, 5.0, 8.0]]),
               "rising_to": np.array([[4.0, 5.5, 8.1]]), "rising_slope": np.array([12.0])}
    diag = SimpleNamespace(numbers=numbers, thresholds=Thresholds())
    assert sentence(diag, 0, "rising").startswith(
        "Fitted volume rises with price over 13% of the observed range, in three stretches: 3.00–4.00, 5.00–5.50 "
        "(the two longest) and 1 more")


def test_an_overridden_candidate_is_judged_as_diagnose_judges_the_chosen_one(sample):
    results, diagnosis = sample
    for s in np.flatnonzero(diagnosis.flagged("rising") | (diagnosis.numbers["rising_share"] > 0)):
        checks = candidate_checks(results, int(s), int(results.chosen[s]))
        assert checks.rising_share == pytest.approx(diagnosis.numbers["rising_share"][s], abs=1e-12)
        assert ("rising" in checks.codes) == diagnosis.flagged("rising")[s]
