"""What the numbers at the plan price mean, in the words ``show``, the screen and the report share.

Each says what the fitted curve gives, not what a price or a control would make happen: an
elasticity only where the data can measure one, the revenue-best price as the fitted curve's, and
the caution naming what the fit does not hold fixed.
"""
from __future__ import annotations

import math

from .formats import fmt, joined, two_places

CONFOUNDERS = ("promotions", "seasons", "stock-outs", "competitors' prices")


def elasticity_words(elasticity, volume, price_varied: bool, flat: str | None = None,
                     tied: str | None = None) -> str:
    """The elasticity at the plan price as it can be read: "elasticity -0.92"; none where price never varied
    (nothing measured it) or the volume is at or below zero (a ratio of relative changes means nothing there);
    ``flat``: the name of a chosen curve with no price term, whose 0 is the model's choice, not a measurement
    (``tied``: the control price moved with, where the price effect may sit; "" where it is not known)."""
    if not price_varied:
        return "elasticity not estimable (price never varied in this series)"
    if volume is not None and not volume > 0:
        return "no elasticity (the volume is not above zero)"
    if flat is not None:
        where = "" if tied is None else f"; the price effect may sit in {tied}'s fitted term" if tied else \
            "; the price effect may sit in the control price moved with (price-tied)"
        return f"elasticity 0: {flat} is flat (the model's choice, not a measurement){where}"
    if elasticity is None or not math.isfinite(elasticity):
        return "elasticity n/a"
    return f"elasticity {two_places(elasticity)}"


REVENUE = "revenue-maximising price of the fitted curve within the observed range"
INFLUENTIAL = "; the curve there rests on one high-influence observation (influential-point): read it with care"


def revenue_words(price_text: str, influential: bool) -> str:
    """"revenue-maximising price of the fitted curve within the observed range: 2.61", with a caution where one
    observation has a large influence on that curve."""
    return f"{REVENUE}: {price_text}" + (INFLUENTIAL if influential else "")


DECIDES = "pricefold proposes; the analyst decides."


def caution(controls=(), season: int = 0, decides: str = DECIDES) -> str:
    """The closing caution: what the curve still confounds price with, naming what this fit holds fixed
    (``controls``: the control columns; ``season``: sine/cosine pairs) rather than listing those as confounders;
    ``decides``: who decides, in the words of where it is read."""
    held = [*controls, *(["the season"] if season else [])]
    others = [name for name in CONFOUNDERS if not (season and name == "seasons")]
    listed = ", ".join(others[:-1]) + " and " + others[-1]
    if held:
        head = (f"This fit holds {joined(held)} fixed; curves fitted to observational sales data still confound "
                f"price with anything else that moved with it ({listed}, where not among those)")
    else:
        head = f"Curves fitted to observational sales data confound price with {listed}"
    return (f"{head}; they describe what happened, not what a price change will cause. Predictions outside the "
            f"observed price range, or at a control value a series has not seen, are extrapolations. {decides}")


def caution_of(settings: dict, decides: str = DECIDES) -> str:
    """``caution`` for a results header's ``settings``: the control columns and season pairs it records."""
    controls = settings.get("controls") or {}
    columns = [name for name in controls.get("terms", []) if not name.startswith("season_")]
    return caution(columns, int(controls.get("season") or 0), decides)


WEIGHTED = ("rows of weight 0 count for nothing; intervals are for a week weighing as much as its series' average "
            "row of positive weight")


def weighting_words(column: str | None) -> str:
    """How the rows count in every fit, and what a weighted interval is for (``fitcore.fit.weights``):
    "weighted by column w (weighted least squares: …)", or "unweighted"."""
    return (f"weighted by column {column} (weighted least squares: {WEIGHTED})" if column else
            "unweighted (every row counts alike)")


def weighed_zero(n_zero) -> str:
    """What to say after a series' row count of its rows of weight 0, which count in ``n`` but in no fit and
    in no observed range: " (4 of weight 0)", or nothing where none weighs 0 (or the results do not say)."""
    return f" ({int(n_zero):,} of weight 0)" if n_zero else ""


def weight_column(results) -> str | None:
    """The weight column a fit names (None: unweighted)."""
    return (results.settings.as_dict().get("columns") or {}).get("weight")


def held_words(values: dict) -> str:
    """The values every curve holds the controls at, as a plan reads them: "promo 1, rival 3.10, the season at
    the plan date (15 Mar)" (``values`` {term: value or None}, the season's terms read together)."""
    from .time_of_year import day_month, plan_phase
    held = ", ".join(f"{name} {fmt(v) if v is not None else '—'}" for name, v in values.items()
                     if not name.startswith("season_"))
    season = [v for name, v in values.items() if name.startswith("season_")]
    if season:  # every term 0 only at the year's average: a date's sin and cos are never both 0
        held += (", " if held else "") + ("the season's average over the year (no plan date given)"
                                          if not any(season) else
                                          f"the season at the plan date ({day_month(plan_phase(*season[:2]))})")
    return held


def elasticity_of(results, diagnosis, s: int, c: int) -> str:
    """``elasticity_words`` for candidate ``c`` of series ``s`` of ``results`` at its plan price."""
    volume = float(results.plan_volume[s, c])
    flat = results.names[c] if results.lineup.complexity[c] <= 1 else None
    tied = None
    if flat is not None and diagnosis.flagged("price-tied")[s]:  # stored results keep the sentence, not the index
        j = int(diagnosis.numbers["tied"][s]) if "tied" in diagnosis.numbers else -1
        tied = results.controls.names[j] if j >= 0 else ""
    return elasticity_words(float(results.plan_elasticity[s, c]), volume,
                            bool(results.price_hi[s] > results.price_lo[s]), flat, tied)
