"""Where a curve rises with price, exactly: from the real roots of its derivative, for many curves at once.

Every family's volume increases with its polynomial's value, and its regressor with price
(``families.base``), so a curve rises where the derivative p′ in t of its polynomial is positive.  p′ keeps
its sign between consecutive real roots, so the rising set over the observed range [-1, 1] is a union of
stretches between roots: at most three for a quintic (p′ of degree 4 changes sign at most four times).
The roots of a quadratic come in closed form, those of a cubic or quartic as the eigenvalues of companion
matrices, stacked for all series of one degree and found by one ``numpy.linalg.eigvals`` call (LAPACK
balances each matrix first); each piece between them is judged by the sign of p′ at its middle.  No grid:
a share is exact, not a multiple of a grid step.

Tolerances, both from what float64 can tell apart:

- ``SLOPE_ROUNDING``: p′ is judged positive only above 32·eps·Σ|cₖ|.  Horner's rule on [-1, 1] carries a
  rounding error up to 2·degree·eps·Σ|cₖ| (8·eps at degree 4) with a margin of 4, and Σ|cₖ| bounds the
  curve itself: a slope below this moves the volume across the whole range by less than the rounding of
  one of its values.  A derivative that touches 0 from below (a tangency) thus never makes a stretch.
- ``ROOT_ROUNDING``: a double root of p′ is found only to about √eps ≈ 1.5e-8 (a defective companion
  matrix; a root of multiplicity m to eps^(1/m)), so a piece shorter than 1e-7 in t, or one where p′ is
  within the slope's rounding, may lie inside a cluster of roots that is really one: it sides with its
  nearest clear neighbours (between two rising pieces, a tangency from above, it joins them in one
  stretch), and a stretch shorter than 1e-7 (a tangency from below) is dropped.  The share moves by no
  more than the roots' own error.  Eigenvalues with an imaginary part up to ``IMAGINARY`` count as real
  breakpoints: a spurious one only splits a piece whose halves are then judged alike.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..fit.basis import polynomial, values_and_slopes

MAX_STRETCHES = 3  # p′ of degree ≤ 4 (a quintic's) is positive on at most three stretches of [-1, 1]
SLOPE_ROUNDING = 32 * np.finfo(float).eps
ROOT_ROUNDING = 1e-7
IMAGINARY = 1e-3  # a root of multiplicity m comes out up to eps^(1/m) off the real line: 1.2e-4 for m = 4


@dataclass(frozen=True, eq=False)
class Rising:
    """Where n curves rise over their observed price range.  ``start``, ``stop``: (n, MAX_STRETCHES) the
    stretches' prices in increasing order, NaN past each curve's last; ``share``: (n,) their total length
    over the range (0 for a single price); ``steepest``: (n,) the largest dV/dprice on them (NaN without)."""

    start: np.ndarray
    stop: np.ndarray
    share: np.ndarray
    steepest: np.ndarray

    @property
    def count(self) -> np.ndarray:
        return np.isfinite(self.start).sum(axis=1)


def real_roots(coef: np.ndarray) -> np.ndarray:
    """(n, P − 1) the real roots in [-1, 1] of polynomials Σ coef[:, k]·tᵏ (n, P), ascending, NaN past the
    last.  Leading coefficients up to eps·Σ|cₖ| are dropped (they move the polynomial on [-1, 1] by less than
    its rounding, and their roots lie far outside); the rest go by degree, quadratics in closed form."""
    n, p = coef.shape
    out = np.full((n, max(p - 1, 0)), np.nan)
    if p < 2:
        return out
    finite = np.isfinite(coef).all(axis=1)
    size = np.abs(coef).sum(axis=1)
    kept = np.abs(coef) > np.finfo(float).eps * size[:, None]
    degree = np.where(finite & kept.any(axis=1), p - 1 - np.argmax(kept[:, ::-1], axis=1), 0)
    for d in range(1, p):
        rows = np.flatnonzero(degree == d)
        if not len(rows):
            continue
        c = coef[rows, :d + 1]
        real = _quadratic_roots(c) if d == 2 else _companion_roots(c)
        out[rows, :d] = np.where((real >= -1) & (real <= 1), real, np.nan)
    return np.sort(out, axis=1)  # NaN sorts last


def _companion_roots(c: np.ndarray) -> np.ndarray:
    """(m, d) the real roots (NaN for the others) of polynomials of degree d (``c`` (m, d + 1)), as the
    eigenvalues of their companion matrices."""
    m, d = c.shape[0], c.shape[1] - 1
    companion = np.zeros((m, d, d))
    companion[:, np.arange(1, d), np.arange(d - 1)] = 1.0  # ones below the diagonal
    companion[:, :, -1] = -c[:, :d] / c[:, d:]
    roots = np.linalg.eigvals(companion)
    return np.where(np.abs(roots.imag) <= IMAGINARY, roots.real, np.nan)


def _quadratic_roots(c: np.ndarray) -> np.ndarray:
    """``_companion_roots`` of quadratics in closed form (100k of them: 2 ms CPU, 38 ms as 2 × 2 eigenvalues):
    the root of larger size from −(b + sign(b)·√disc)/2a, the other from their product c/a, so neither suffers
    cancellation."""
    c0, b, a = c[:, 0], c[:, 1], c[:, 2]
    disc = b * b - 4 * a * c0
    with np.errstate(invalid="ignore", divide="ignore"):
        q = -(b + np.copysign(np.sqrt(np.maximum(disc, 0.0)), b)) / 2
        near = np.where(disc >= 0, q / a, -b / (2 * a))  # a complex pair: its real part, if near the line
        far = np.where(disc >= 0, np.where(q != 0, c0 / q, 0.0), near)
        real = (disc >= 0) | (np.sqrt(np.maximum(-disc, 0.0)) / (2 * np.abs(a)) <= IMAGINARY)
    return np.where(real[:, None], np.stack([near, far], axis=1), np.nan)


def rising_pieces(coef: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(n, MAX_STRETCHES) start and stop in t ∈ [-1, 1] of the stretches where Σ coef[:, k]·tᵏ rises,
    ascending, NaN past the last (see the module's tolerances)."""
    n, p = coef.shape
    cuts = np.concatenate([np.full((n, 1), -1.0), real_roots(coef[:, 1:] * np.arange(1, p)), np.ones((n, 1))],
                          axis=1)
    cuts = np.sort(np.where(np.isnan(cuts), 1.0, cuts), axis=1)  # a missing root: an empty piece at the end
    lo, hi = cuts[:, :-1], cuts[:, 1:]
    slope = polynomial(coef, (lo + hi) / 2, 1)
    limit = SLOPE_ROUNDING * np.abs(coef).sum(axis=1, keepdims=True)
    with np.errstate(invalid="ignore"):
        up = slope > limit
        # a piece too short, or too flat, to tell from a cluster of roots (a tangency) sides with its nearest
        # clear neighbours: between two rising ones, it joins them in one stretch
        unclear = (hi - lo < ROOT_ROUNDING) | (np.abs(slope) <= limit)
    before, after = np.zeros(up.shape, bool), np.zeros(up.shape, bool)  # the nearest clear piece's rise
    left, right = np.zeros(n, bool), np.zeros(n, bool)
    for j in range(up.shape[1]):
        before[:, j], after[:, -1 - j] = left, right
        left = np.where(unclear[:, j], left, up[:, j])
        right = np.where(unclear[:, -1 - j], right, up[:, -1 - j])
    joined = up | (unclear & before & after)
    edge = np.zeros((n, 1), bool)
    rows, first = np.nonzero(joined & ~np.concatenate([edge, joined[:, :-1]], axis=1))  # each stretch's first piece
    last = np.nonzero(joined & ~np.concatenate([joined[:, 1:], edge], axis=1))[1]  # and last, in the same order
    lo, hi = lo[rows, first], hi[rows, last]
    kept = hi - lo >= ROOT_ROUNDING  # shorter: a tangency from below
    rows, lo, hi = rows[kept], lo[kept], hi[kept]
    rank = np.arange(len(rows)) - np.searchsorted(rows, rows)  # the stretch's place in its series
    start, stop = np.full((n, MAX_STRETCHES), np.nan), np.full((n, MAX_STRETCHES), np.nan)
    start[rows, rank], stop[rows, rank] = lo, hi
    return start, stop


def rising(family, coef, mid, half, smear, lo, hi) -> Rising:
    """Where curves of one ``family`` rise: ``coef`` (n, P) in the family's basis (``mid``, ``half``: (n,)
    its window), ``smear`` (n,), over the observed prices [``lo``, ``hi``] (n,).

    The steepest slope is the family's dV/dprice at the stretches' ends and where p″ = 0 inside them: exact
    for every family here (p′ peaks at an end or where p″ = 0; a log family's slope, b·V/half or b·V/(half·P),
    is monotone in price)."""
    coef = np.asarray(coef, dtype=float)
    n = len(coef)
    ranged = hi > lo
    t_start, t_stop = rising_pieces(coef)
    t_start[~ranged], t_stop[~ranged] = np.nan, np.nan  # a single price: nothing to rise over
    with np.errstate(invalid="ignore", over="ignore"):
        start = np.clip(family.price_of(mid[:, None] + half[:, None] * t_start), lo[:, None], hi[:, None])
        stop = np.clip(family.price_of(mid[:, None] + half[:, None] * t_stop), lo[:, None], hi[:, None])
        share = np.where(ranged, np.nansum(stop - start, axis=1) / np.where(ranged, hi - lo, 1.0), 0.0)
    bends = np.full((n, max(coef.shape[1] - 3, 0)), np.nan)  # where p″ = 0, on curves that rise somewhere
    some = np.flatnonzero(np.isfinite(t_start[:, 0]))
    if bends.shape[1] and len(some):
        bends[some] = real_roots(coef[some, 2:] * (np.arange(2, coef.shape[1]) * np.arange(1, coef.shape[1] - 1)))
    inside = ((bends[:, :, None] >= t_start[:, None, :]) & (bends[:, :, None] <= t_stop[:, None, :])).any(axis=2)
    points = np.concatenate([t_start, t_stop, np.where(inside, bends, np.nan)], axis=1)
    where = np.isfinite(points)
    t = np.where(where, points, 0.0)
    fitted, fitted_t = values_and_slopes(coef, t)
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        volume = family.volume(fitted, smear[:, None])
        slope = family.slope(fitted_t, volume, half[:, None], family.price_of(mid[:, None] + half[:, None] * t))
        steepest = np.where(where, slope, -np.inf).max(axis=1) if points.shape[1] else np.full(n, -np.inf)
    found = Rising(start, stop, share, np.where(np.isfinite(steepest), steepest, np.nan))
    for array in (found.start, found.stop, found.share, found.steepest):
        array.flags.writeable = False
    return found
