"""The shape and range flags of any one candidate of a series, not only the chosen one.

``diagnose`` checks the chosen curve of every series at once; an analyst about to
override wants the same checks for the curve they are about to pick.  This evaluates
one candidate as ``diagnose`` does: where it rises exactly (``rising``), its lowest volume
through ``evidence.curve`` (whatever its family) on a fine grid over the observed prices.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..fit.results import Results
from .evidence import basis_of, curve
from .flags import CODES, control_ranges
from .rising import rising
from .thresholds import Thresholds

FINE = 401  # points for the lowest volume (diagnose refines its grid minimum; a finer grid does the same job)


@dataclass(frozen=True)
class CandidateChecks:
    """``codes``: the flags this candidate would raise (``rising``, ``below-zero``, ``outside-range``,
    in the order of ``flags.CODES``); the numbers behind them: the share of the observed range where
    volume rises with price, and the lowest volume over the range (or at the plan price) and where."""

    codes: tuple[str, ...]
    rising_share: float
    lowest_volume: float
    lowest_at: float


def candidate_checks(results: Results, s: int, c: int, thresholds: Thresholds = Thresholds(),
                     controls_outside: bool | None = None) -> CandidateChecks:
    """The flags candidate ``c`` of series ``s`` would carry if it were the one put into the plan.
    ``controls_outside``: whether a control's plan value lies outside the series' values — the same for
    every candidate, so given once by the caller (``Diagnosis.controls_outside``); else found here."""
    if not results.available[s, c]:
        return CandidateChecks((), math.nan, math.nan, math.nan)
    mid, half = float(results.mid[s]), float(results.half[s])
    family, coef, basis_mid, basis_half, smear = basis_of(results, s, c)
    one = [np.array([float(v)]) for v in (basis_mid, basis_half, smear, results.price_lo[s], results.price_hi[s])]
    share = float(rising(family, coef[None], *one).share[0])
    fine = mid + half * np.linspace(-1.0, 1.0, FINE)
    volume = curve(results, s, c, fine)
    low = int(np.nanargmin(volume)) if np.isfinite(volume).any() else 0
    lowest, lowest_at = float(volume[low]), float(fine[low])
    plan = float(results.plan_price[s])
    planned = math.isfinite(plan)
    if planned and results.plan_volume[s, c] < min(lowest, 0.0):
        lowest, lowest_at = float(results.plan_volume[s, c]), plan
    raised = {
        "rising": share > thresholds.rising_share,
        "below-zero": lowest < 0,
        "outside-range": (planned and not results.price_lo[s] <= plan <= results.price_hi[s])
                         or (bool(control_ranges(results, np.array([s]), thresholds.season_days)[2].any())
                             if controls_outside is None else controls_outside),
    }
    return CandidateChecks(tuple(code for code in CODES if raised.get(code)), share, lowest, lowest_at)
