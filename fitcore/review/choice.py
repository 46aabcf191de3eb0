"""Sentences about a series' choice that ``pricefold show`` and the triage screen both print:
why this candidate was chosen, what its score means, and where the plan price sits."""
from __future__ import annotations

import math

from .formats import fmt, money


def why_chosen(scored: list[tuple[str, float, float]], chosen: str | None, rule: str) -> str:
    """Why ``chosen`` won under ``rule``; ``scored``: (name, CV MSE, its SE) of every available candidate."""
    if not chosen or not scored:
        return "no candidate could be fitted and cross-validated"
    by_name = {name: (mse, se) for name, mse, se in scored}
    best = min(scored, key=lambda item: item[1])
    if rule == "lowest" or best[0] == chosen:
        return f"lowest mean CV error ({fmt(best[1])})"
    limit = best[1] + best[2]
    return (f"simplest candidate within one standard error of the lowest CV error "
            f"({best[0]} {fmt(best[1])} ± {fmt(best[2])}; {chosen} {fmt(by_name[chosen][0])} ≤ {fmt(limit)})")


def score_meaning(q2: float, weak: float) -> str:
    """Q² in words: how the held-out errors compare with always predicting the series' average volume.

    ``weak``: the weak-fit threshold.  Q² = 1 − held-out squared errors / squared deviations from the mean,
    so 1 − Q² is the curve's held-out squared error as a share of the average's.
    """
    if q2 is None:
        return "no score: no candidate was cross-validated"
    if not math.isfinite(q2):  # a cross-validated candidate whose judged volumes never vary: 0/0
        return "no score: the volumes Q² is judged on never vary, so it is undefined"
    head = f"Q² {_percent(q2)}"
    if q2 < 0:
        return f"{head}: worse than predicting the average volume"
    if q2 < weak:
        return f"{head}: barely better than predicting the average volume"
    return f"{head}: held-out errors are {_percent(1 - q2)} of those of predicting the average volume"


def plan_position(plan: float, lo: float, hi: float) -> str:
    """Where the plan price sits among the observed prices, in words."""
    if plan is None or not math.isfinite(plan):
        return "no plan price"
    if plan > hi:
        return f"{money(plan - hi)} above the highest price observed ({money(hi)}): an extrapolation"
    if plan < lo:
        return f"{money(lo - plan)} below the lowest price observed ({money(lo)}): an extrapolation"
    if hi <= lo:
        return f"at the only price observed ({money(lo)})"
    return f"at {_percent((plan - lo) / (hi - lo))} of the observed range {money(lo)}–{money(hi)}"


def _percent(share: float) -> str:
    text = f"{share * 100:.0f}%"
    return text.replace("-", "−") if text != "-0%" else "0%"
