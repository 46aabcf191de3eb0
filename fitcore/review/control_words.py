"""A candidate's control effects in words a planner reads: "promo: ×1.8 volume", "promo: +120 units".

For a family fitted to ln volume a control multiplies volume (×exp(γ) for a 0/1
control; per 1.00 more of any other); for a polynomial it adds units.  These are the
fitted curve's terms, read from observational data, not what setting a control would
do: every caller says so where it shows them ("with the fitted curve", "as fitted").  The
season terms are read together: how far the season moves volume over the year
(its lowest and highest point, on a grid of the year's days).
"""
from __future__ import annotations

import math

import numpy as np

from .formats import fmt, signed

SEASON_GRID = 366


def effect_words(controls: dict, binary, logged: bool) -> list[str]:
    """One phrase per control term of a candidate (``controls`` {term: coefficient or None (left out)}),
    the season terms as one; ``binary``: the 0/1 terms; ``logged``: fitted to ln volume."""
    out, season = [], {}
    for name, value in controls.items():
        if name.startswith("season_"):
            season[name] = value
            continue
        if value is None or not math.isfinite(value):
            out.append(f"{name}: left out")
            continue
        per = "" if name in binary else " per 1.00 more"
        out.append(f"{name}: {_times(value) + ' volume' if logged else signed(value) + ' units'}{per}")
    if season:
        out.append(season_words(season, logged))
    return out


def season_words(terms: dict, logged: bool) -> str:
    """"season: ×0.82 to ×1.19 over the year" (or "-40 to +60 units"), from the sin/cos coefficients."""
    if any(v is None or not math.isfinite(v) for v in terms.values()):
        return "season: left out"
    angle = 2 * np.pi * np.arange(SEASON_GRID) / SEASON_GRID
    effect = np.zeros(SEASON_GRID)
    for name, value in terms.items():
        kind, k = name[len("season_"):len("season_") + 3], int(name[len("season_") + 3:])
        effect += value * (np.sin(k * angle) if kind == "sin" else np.cos(k * angle))
    low, high = float(effect.min()), float(effect.max())
    if logged:
        return f"season: {_times(low)} to {_times(high)} volume over the year"
    return f"season: {signed(low)} to {signed(high)} units over the year"


def _times(value: float) -> str:
    """×exp(value): two decimals near 1, else one (three significant digits past 10)."""
    factor = math.exp(value)
    return f"×{factor:.2f}" if abs(factor - 1) < 0.1 else f"×{factor:.1f}" if factor < 10 else f"×{fmt(factor)}"
