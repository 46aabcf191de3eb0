"""The contract every curve family keeps, and the code all families share.

A family is a set of candidates that are polynomials in one mapped
regressor: t = (x − mid)/half, x = price or ln price, [mid − half, mid + half]
the series' range of x (``basis``).  Shared code maps prices into that
coordinate, evaluates the polynomial (``basis.horner``) and builds the
interval; the family's hooks say what the polynomial means:

- ``candidates(settings)``: its candidates (names, complexity), or none when switched off;
- ``x(price)``: its regressor, ``price_of(x)`` the inverse; ``serves(chunk)``: the series it can fit (``unserved_reason`` for the others);
- ``fit(chunk, candidates)``: every candidate on every fold of a chunk's series (``Fitted``),
  through the compiled lanes; ``fold_errors`` / ``row_errors``: its held-out errors in volume
  units, per fold or per left-out row (the fold scheme picks one);
- ``volume(fitted, smear)``, ``interval(...)``, ``slope(...)``, ``elasticity(...)``: a curve
  value on the family's fit scale (and its derivative in t) turned into volume, its band,
  dV/dprice and dV/dP·P/V;
- ``best_revenue(...)``: the revenue-maximising price within the observed range.

Code outside a family module loops over families (``Lineup``) and never tests
a family's name nor assumes its candidates' columns.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..basis import mapped, polynomial, power_coefficients, window


@dataclass(frozen=True)
class Candidate:
    """One curve shape.  ``complexity`` is its number of coefficients."""

    name: str
    family: str
    degree: int | None
    complexity: int


@dataclass(frozen=True, eq=False)
class Fitted:
    """One family's fit of one chunk: S series, its k candidates, P its widest, N rows, K folds.

    - ``coef``: (S, k, P) coefficients of powers of t of the fit on all rows (zero past each size);
      ``mid``, ``half``: (S,) the window t maps (``basis``).
    - ``fit_ok``: (S, k) the fit on all rows is determined; ``held_ok``: (S, k) every held-out
      prediction exists (every fold's fit is, or no row alone pins down a coefficient).
    - ``held_out``: (S, K, k) weighted squared volume errors of each fold, or (N, k) of each
      left-out row; ``sse``: (S, k) in-sample weighted squared volume error; ``fit_sse``:
      (S, k) the same on the fit scale (σ² = fit_sse / df).
    - ``smear``: (S, k) Duan's smearing factor, NaN for families judged without one.
    - ``unserved``: (S,) series the family cannot fit (``Family.unserved_reason``), or None.
    - ``lower``, ``scale``: (S, P, P), (S, P) the fit's scaled Cholesky factor (``basis.leverage``).
    - ``rows``, ``target``, ``row_coef``: (N,), (N,), (S, k, P): residuals target − Σ row_coef·rowsᵏ
      on the fit scale, for Cook's distance.
    - ``gamma``: (S, k, m) with controls, each candidate's control coefficients on the fit scale
      (their columns' own units; 0 where left out), ``coef`` then being the curve at the series'
      average controls and ``lower``, ``scale`` the factor over [1, controls…, t, …]; None without.
    """

    coef: np.ndarray
    mid: np.ndarray
    half: np.ndarray
    fit_ok: np.ndarray
    held_ok: np.ndarray
    held_out: np.ndarray
    sse: np.ndarray
    fit_sse: np.ndarray
    smear: np.ndarray
    unserved: np.ndarray | None
    lower: np.ndarray
    scale: np.ndarray
    rows: np.ndarray
    target: np.ndarray
    row_coef: np.ndarray
    gamma: np.ndarray | None = None
    tie: object = None  # with controls: ``controls.PriceTie`` of the family's regressor


class Family:
    """A curve family: the hooks below, and shared code that maps prices and calls them."""

    name: str
    regressor: str  # "price" or "log_price": the x of its basis
    smeared: bool = False  # fitted to ln volume, judged in volume units with Duan's smearing factor
    unserved_reason: str | None = None

    def candidates(self, settings) -> tuple[Candidate, ...]:
        raise NotImplementedError

    def x(self, price):
        """The family's regressor at ``price``: increasing in it, as every volume is in its fitted value, so
        a curve rises with price where its polynomial rises in t (``review.rising``)."""
        return price

    def price_of(self, x):
        """The price whose regressor is ``x`` (the inverse of ``x``)."""
        return x

    def serves(self, chunk) -> np.ndarray | None:
        """(S,) the series of a chunk the family can fit; None: all."""
        return None

    def fit(self, chunk, candidates) -> Fitted:
        raise NotImplementedError

    def response(self, volume):
        """Volume on the family's fit scale (what its polynomial predicts)."""
        raise NotImplementedError

    def volume(self, fitted, smear):
        """Volume from a value ``fitted`` on the family's fit scale."""
        raise NotImplementedError

    def interval(self, fitted, spread, smear):
        """(volume, lower, upper) from a fit-scale value and the half-width of its interval."""
        raise NotImplementedError

    def slope(self, fitted_t, volume, half, price):
        """dV/dprice at ``price``, from the fit-scale curve's derivative in t there and the volume."""
        raise NotImplementedError

    def elasticity(self, fitted_t, volume, half, price):
        """dV/dP·P/V at ``price``, from the same."""
        raise NotImplementedError

    def best_revenue(self, coef, mid, half, smear, lo, hi) -> np.ndarray:
        """(S,) the price in [lo, hi] with the most revenue under each curve ``coef`` (S, P)."""
        raise NotImplementedError

    # Shared code: map the price, then call the hooks.

    def coordinate(self, price, mid, half):
        """t at ``price`` in the window (``mid``, ``half``) of the family's regressor."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return mapped(self.x(price), mid, half)

    def grid_coordinate(self, price, t_price, mid, half):
        """t at prices whose coordinate in the series' price window is ``t_price``: that very grid for a
        family fitted in price (its window is the price window), else mapped from ``price``."""
        return t_price if self.regressor == "price" else self.coordinate(price, mid, half)

    def curve(self, coef, mid, half, smear, price):
        """Volume at ``price`` under ``coef``: (P,) one curve at every price, or (n, P) one a price (row)."""
        return self.volume(polynomial(coef, self.coordinate(price, mid, half)), smear)

    def at(self, coef, mid, half, smear, leverage, sigma2, df, price, level):
        """Volume, prediction-interval bounds and elasticity at ``price``.

        The ordinary least-squares t-interval for a new observation on the fit scale,
        fitted ± t(1 − α/2, n − p)·σ̂·√(1 + xᵀ(XᵀWX)⁻¹x), then turned into volume (``interval``);
        ``leverage`` is xᵀ(XᵀWX)⁻¹x at the price (``basis.leverages``).  No elasticity (NaN) where the
        volume is at or below zero: a ratio of relative changes means nothing there.
        """
        t = self.coordinate(price, mid, half)
        fitted = polynomial(coef, t)
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            spread = t_quantile(level, df) * np.sqrt(sigma2 * (1 + leverage))
            volume, lo, hi = self.interval(fitted, spread, smear)
            elasticity = self.elasticity(polynomial(coef, t, 1), volume, half, price)
            return volume, lo, hi, np.where(volume > 0, elasticity, np.nan)

    def on_grid(self, coef, mid, half, smear, price, t_price):
        """Volume (n, G) of curves ``coef`` (n, P) at prices (n, G) whose coordinate in each series' price
        window is ``t_price``; ``mid``, ``half``, ``smear``: (n,)."""
        t = self.grid_coordinate(price, t_price, mid[:, None], half[:, None])
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            return self.volume(polynomial(coef, t), smear[:, None])

    def plain(self, coef, mid, half, powers=None):
        """Coefficients of powers of the regressor itself (``basis.power_coefficients``)."""
        return power_coefficients(coef, mid, half, powers)

    def window_of(self, lo, hi, fitted):
        """(mid, half) of the regressor over prices [lo, hi], zeros where not ``fitted`` (as the fit leaves them)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return window(np.where(fitted, self.x(lo), 0.0), np.where(fitted, self.x(hi), 0.0))


def t_quantile(level: float, df) -> np.ndarray:
    """Student-t quantile at (1 + level)/2 for each df (computed once per distinct df)."""
    from scipy.special import (
        stdtrit,  # imported on first use: scipy costs 0.2 s to import
    )

    df = np.maximum(np.asarray(df), 1)
    if df.size and df.max() <= 4096:  # a lookup table beats sorting for the usual sizes
        return stdtrit(np.arange(1, df.max() + 1), 1 - (1 - level) / 2)[df - 1]
    distinct, index = np.unique(df, return_inverse=True)
    return stdtrit(distinct, 1 - (1 - level) / 2)[index.reshape(np.shape(df))]
