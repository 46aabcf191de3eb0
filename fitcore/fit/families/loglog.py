"""Constant elasticity: ln volume = a + e·ln price (the ``loglog`` candidate).

Its elasticity is e at every price; revenue ∝ price^(1 + e) peaks at the
top of the observed range when e > −1, else at the bottom.  Needs every
price and volume above zero.
"""
from __future__ import annotations

import numpy as np

from ..basis import width
from .logvolume import LogVolume


class LogLog(LogVolume):
    name = "loglog"
    regressor = "log_price"
    unserved_reason = "a log-log curve needs every price and volume above zero"

    def x(self, price):
        return np.log(price)

    def price_of(self, x):
        return np.exp(x)

    def serves(self, ch) -> np.ndarray:
        return (ch.v_low > 0) & (ch.p_low > 0)

    def slope(self, fitted_t, volume, half, price):
        return fitted_t / width(half) * volume / price

    def elasticity(self, fitted_t, volume, half, price):
        return fitted_t / width(half)

    def best_revenue(self, coef, mid, half, smear, lo, hi) -> np.ndarray:
        return np.where(coef[:, 1] / width(half) > -1, hi, lo)
