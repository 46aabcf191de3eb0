"""The shape and range flags of any one candidate of a series, not only the chosen one.

``diagnose`` checks the chosen curve of every series at once; an analyst about to
override wants the same checks for the curve they are about to pick.  This evaluates
one candidate as ``diagnose`` does: where it rises exactly (``rising``), its lowest volume
through its family's curve on a fine grid over the observed prices.  ``curve_checks`` does it for a
curve given by its numbers, ``candidate_checks`` for a candidate of ``Results`` (the override dialog): one
computation for both.  ``standing_codes`` gives the flags of a series where another candidate than the proposal
stands (an override), from a results record's candidate or the decision's signed curve: what ``ledger export``,
``show --ledger`` and the report say of it; ``carried_codes`` those of the curve a carry of a decision signed on
other data would make stand on new data, by which ``ledger carry``, ``show --ledger`` and the screen judge it.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..fit.basis import window
from ..fit.results import Results
from .evidence import basis_of
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
    if controls_outside is None:
        controls_outside = bool(control_ranges(results, np.array([s]), thresholds.season_days)[2].any())
    return curve_checks(*basis_of(results, s, c), float(results.price_lo[s]), float(results.price_hi[s]),
                        float(results.plan_price[s]), float(results.plan_volume[s, c]), thresholds, controls_outside)


def curve_checks(family, coef: np.ndarray, basis_mid: float, basis_half: float, smear: float, price_lo: float,
                 price_hi: float, plan_price: float, plan_volume: float, thresholds: Thresholds,
                 controls_outside: bool) -> CandidateChecks:
    """``candidate_checks`` of one curve given by its numbers, as a results file holds them (``ledger export``
    reads them from its columns or records): its ``family`` (a ``Family``), ``coef`` (size,) in the family's
    basis over the window ``basis_mid``, ``basis_half``, Duan's ``smear`` (log families); the series' observed
    prices [``price_lo``, ``price_hi``]; the plan price (NaN: none) and the curve's volume there."""
    coef = np.asarray(coef, dtype=float)
    mid, half = window(price_lo, price_hi)
    one = [np.array([float(v)]) for v in (basis_mid, basis_half, smear, price_lo, price_hi)]
    share = float(rising(family, coef[None], *one).share[0])
    fine = mid + half * np.linspace(-1.0, 1.0, FINE)
    volume = family.curve(coef, basis_mid, basis_half, smear, fine)
    low = int(np.nanargmin(volume)) if np.isfinite(volume).any() else 0
    lowest, lowest_at = float(volume[low]), float(fine[low])
    planned = math.isfinite(plan_price)
    if planned and plan_volume < min(lowest, 0.0):
        lowest, lowest_at = float(plan_volume), plan_price
    raised = {
        "rising": share > thresholds.rising_share,
        "below-zero": lowest < 0,
        "outside-range": (planned and not price_lo <= plan_price <= price_hi) or controls_outside,
    }
    return CandidateChecks(tuple(code for code in CODES if raised.get(code)), share, lowest, lowest_at)


# The flags of a series where another candidate than the proposal stands (an override): ``CHECKED`` are this
# module's, made for that candidate; ``PROPOSAL_ONLY`` were computed for the proposal's fit alone (its rival
# within one SE, its held-out errors across folds, its Q², its most influential row) and say nothing of
# another curve; ``OF_THE_SERIES`` are of the series' data and plan, or of the signed curve's backtest
# (``shifted``), and hold whichever model stands.  Every code is in exactly one of them.
CHECKED = ("rising", "below-zero", "outside-range")
PROPOSAL_ONLY = ("near-tie", "unsteady-folds", "weak-fit", "influential-point")
OF_THE_SERIES = ("few-points", "no-model", "flat-price", "price-gap", "price-tied", "shifted", "stale")


def codes_for_another(codes, checked: tuple[str, ...] | None) -> list[str]:
    """A series' flag ``codes`` (the proposal's) as they read where another candidate stands: the series' own
    kept, that candidate's ``checked`` codes (``CandidateChecks.codes``) in place of the proposal's, the
    proposal's own dropped — in the order of ``flags.CODES``.  ``checked`` None: no curve to check (the
    results hold none of that model): ``rising`` and ``below-zero`` cannot be said, ``outside-range`` (of the
    plan, not of the curve) stays as recorded."""
    kept = set(codes) & set(OF_THE_SERIES)
    kept |= set(checked) if checked is not None else set(codes) & {"outside-range"}
    return [code for code in CODES if code in kept]


def record_checks(cand: dict | None, snapshot: dict | None, price, lo, hi, codes, thresholds: Thresholds
                  ) -> CandidateChecks | None:
    """``curve_checks`` of the curve a series stands on where it is another candidate than the proposal: the
    results record's candidate ``cand`` in its basis (``basis``, as a JSON results file holds it), else the
    decision's ``signed`` snapshot's curve (a model these results do not hold), at the plan ``price`` (None:
    none) over the observed prices [``lo``, ``hi``] (None: unknown), by the fit's ``thresholds``; None where
    neither holds a curve.  Whether a control's plan value lies outside the series' is the same for every
    candidate: the proposal's ``outside-range`` (in its ``codes``) where the plan price is not outside."""
    from ..fit.families import BY_NAME
    if cand and cand.get("basis"):
        family, basis, smearing, volume = cand["family"], cand["basis"], cand.get("smearing"), cand.get("plan_volume")
    elif snapshot and (snapshot.get("basis") or {}).get("coef"):
        family, basis, smearing, volume = snapshot["family"], snapshot["basis"], snapshot.get("smearing"), None
    else:
        return None
    kind = BY_NAME[family]
    coef = np.asarray(basis["coef"], dtype=float)
    smear = (1.0 if smearing is None else float(smearing)) if kind.smeared else math.nan  # as ``stored`` reads it
    planned = price is not None
    if planned and volume is None:  # the signed curve at this plan price
        volume = float(kind.curve(coef, basis["mid"], basis["half"], smear, np.array([float(price)]))[0])
    lo, hi = (math.nan if lo is None else lo), (math.nan if hi is None else hi)
    price_outside = planned and not lo <= price <= hi
    return curve_checks(kind, coef, basis["mid"], basis["half"], smear, lo, hi, float(price) if planned else math.nan,
                        math.nan if volume is None else float(volume), thresholds,
                        "outside-range" in codes and not price_outside)


def standing_codes(codes, cand: dict | None, snapshot: dict | None, price, lo, hi, thresholds: Thresholds
                   ) -> tuple[list[str], bool]:
    """``(codes, checked)``: the flag codes a series carries where another candidate than its proposal stands —
    the proposal's ``codes`` read for that candidate (``codes_for_another``) with its curve's own checks
    (``record_checks``, whose arguments these are); ``checked`` false where no curve could be checked (the
    results hold none of it, nor does the decision: ``rising`` and ``below-zero`` cannot be said).  The caller
    says whether another candidate stands (not where the decision is stale: signed on other data)."""
    checks = record_checks(cand, snapshot, price, lo, hi, codes, thresholds)
    return codes_for_another(codes, None if checks is None else checks.codes), checks is not None


def standing_codes_in(results: Results, s: int, model: str, codes, snapshot: dict | None, thresholds: Thresholds,
                      controls_outside: bool) -> list[str]:
    """``standing_codes`` of series ``s`` of ``Results`` where ``model`` (not the proposal) stands: the results'
    candidate of that name as the override dialog checks it (``candidate_checks``), else (a model these results
    did not fit) the decision's ``signed`` ``snapshot``'s curve; ``codes``: the proposal's, in any order."""
    if model in results.names:
        checks = candidate_checks(results, s, results.names.index(model), thresholds, controls_outside)
        return codes_for_another(codes, checks.codes)
    price = float(results.plan_price[s])
    return standing_codes(codes, None, snapshot, price if math.isfinite(price) else None, float(results.price_lo[s]),
                          float(results.price_hi[s]), thresholds)[0]


def carried_codes(record: dict, model: str | None, thresholds: Thresholds) -> list[str]:
    """The flag codes by which a decision signed on other data that makes ``model`` stand is carried to the data of a
    results ``record`` (the JSON layout; ``thresholds``: its fit's) or left for a person: those of the curve a carry
    would make stand, as it shows them once carried — the record's own (its proposal's) where ``model`` is the
    proposal, else that candidate's (``standing_codes``: the series' data flags kept, its own curve checked).
    Where the record holds no fitted curve of ``model`` (not fitted, not available, no ``basis``: written before
    it), nothing a carry could make stand: the proposal's.  ``ledger carry`` judges its stop flags by them and
    records them, ``show --ledger`` says them as due (``due.left_for_human``); ``carried_codes_in`` for ``Results``."""
    codes = [flag["code"] for flag in record["flags"]]
    cand = next((c for c in record.get("candidates") or () if c["name"] == model), None)
    if model == record["chosen"] or cand is None or not cand["available"] or not cand.get("basis"):
        return codes
    lo, hi = record.get("price_range") or (None, None)
    return standing_codes(codes, cand, None, (record.get("plan") or {}).get("price"), lo, hi, thresholds)[0]


def carried_codes_in(results: Results, s: int, model: str | None, codes, thresholds: Thresholds,
                     controls_outside: bool) -> list[str]:
    """``carried_codes`` of series ``s`` of ``Results`` (``codes``: its proposal's, in the order of ``flags.CODES``):
    the override dialog's checks of candidate ``model`` (``standing_codes_in``) where these results fitted it and it
    is not the proposal; else ``codes``.  The screen's due and ``ledger carry`` on Parquet results go by it."""
    c = results.names.index(model) if model in results.names else -1
    if c < 0 or c == int(results.chosen[s]) or not results.available[s, c]:
        return list(codes)
    return standing_codes_in(results, s, model, codes, None, thresholds, controls_outside)
