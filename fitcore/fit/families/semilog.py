"""Constant semi-elasticity: ln volume = a + b·price (the ``semilog`` candidate, off unless asked for).

A price change of 1 moves volume by the same share everywhere (b, the
semi-elasticity); the elasticity is b·price.  Revenue price·exp(a + b·price)
peaks at price −1/b when b < 0 (kept within the observed range), and at the
top of the range otherwise.  Needs every volume above zero.
"""
from __future__ import annotations

import numpy as np

from ..basis import width
from .logvolume import LogVolume


class SemiLog(LogVolume):
    name = "semilog"
    regressor = "price"
    unserved_reason = "a semi-log curve needs every volume above zero"

    def serves(self, ch) -> np.ndarray:
        return ch.v_low > 0

    def slope(self, fitted_t, volume, half, price):
        return fitted_t / width(half) * volume

    def elasticity(self, fitted_t, volume, half, price):
        return fitted_t / width(half) * price

    def best_revenue(self, coef, mid, half, smear, lo, hi) -> np.ndarray:
        b = coef[:, 1] / width(half)
        with np.errstate(divide="ignore"):
            peak = np.where(b < 0, -1 / b, np.inf)
        return np.clip(peak, lo, hi)
