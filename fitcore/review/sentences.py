"""Plain-language sentences for flags, quoting the numbers behind them."""
from __future__ import annotations

import functools
import math
from pathlib import Path

import numpy as np

from ..fit import reasons as R
from ..fit.basis import outside_prices
from .formats import fmt, fmt_ratio, joined, money, pct, pct_beside, ratio, signed, span, two_places


def sentence(diag, s: int, code: str) -> str:
    return SENTENCES[code](diag, s)


def _few_points(diag, s):
    data = diag.results.data
    n = int(data.counts[s])
    wanted = diag.thresholds.min_points
    weightless = diag.results.reason[s, 0] in (R.NO_WEIGHT, R.WEIGHT_OVERFLOW) and diag.results.chosen[s] < 0
    said = f"{n} observation{'s' * (n != 1)}"
    weighed = n if data.weight is None else int((data.weight[data.offsets[s]:data.offsets[s + 1]] > 0).sum())
    if not weightless and weighed < n:  # rows of weight 0 are no observations
        said = f"{weighed} observation{'s' * (weighed != 1)} of positive weight"
    if weightless:
        return f"{said}, but {diag.results.reason_text(s, 0)}."
    if diag.results.chosen[s] < 0:
        return f"Only {said}: too few to cross-validate any candidate (at least {wanted} wanted)."
    return f"Only {said}; at least {wanted} are wanted to trust a cross-validated choice."


def _no_model(diag, s):
    r = diag.results
    available = [c for c in range(len(r.names)) if r.reason[s, c] == R.NONE]
    if available:  # results written before such candidates were marked unavailable (HELD_OUT_OVERFLOW)
        names = ", ".join(r.names[c] for c in available)
        return (f"No candidate could be scored: the cross-validated errors of {names} are not finite numbers "
                f"(values too large or too small for the arithmetic), so no curve is proposed.")
    return f"No candidate could be fitted ({r.names[0]}: {r.reason_text(s, 0)}), so no curve is proposed."


def _flat_price(diag, s):
    r = diag.results
    distinct = int(diag.numbers["distinct"][s])
    if distinct == 1:
        return f"Every observation has the same price ({money(r.price_lo[s])}): the data say nothing about price response."
    if distinct < diag.thresholds.min_distinct_prices:
        return (f"Only {distinct} distinct prices ({money(r.price_lo[s])} and {money(r.price_hi[s])}): "
                f"a curve's shape between them is a guess.")
    cv, wanted = diag.numbers["price_cv"][s], diag.thresholds.min_price_cv
    # as many decimals as it takes not to read as enough ("2% (2% wanted)": 1.96%) nor as none at all ("0%" for a
    # price that did move: 0.1%; a trial)
    said = next(f"{cv * 100:.{d}f}%" for d in (0, 1, 2, 3, 4)
                if (f"{cv * 100:.{d}f}" != f"{wanted * 100:.{d}f}" and (cv <= 0 or float(f"{cv * 100:.{d}f}") > 0))
                or d == 4)
    return (f"Price varied by only {said} (coefficient of variation; "
            f"{pct(wanted)} wanted), between {money(r.price_lo[s])} and {money(r.price_hi[s])}.")


def _rising(diag, s):
    n = diag.numbers
    return (f"Fitted volume rises with price over {pct_beside(n['rising_share'][s], diag.thresholds.rising_share)} "
            f"of the observed range, {stretches(n['rising_from'][s], n['rising_to'][s])} (slope up to "
            f"{signed(n['rising_slope'][s])} units per 1.00 of price); often promotions or stock-outs "
            f"moving with price.")


NUMBER_WORDS = {2: "two", 3: "three"}


def stretches(starts: np.ndarray, stops: np.ndarray) -> str:
    """Where a curve rises: "within 7.19–9.17", "in two stretches: 2.82–2.96 and 3.76–3.91", or past two,
    the two longest (in price order) "and 1 more"; ``starts``, ``stops``: the stretches, NaN past the last."""
    # as Python floats: written for each of many series, numpy's calls on three numbers took 5.6 µs, these 2.9
    found = [(lo, hi) for lo, hi in zip(starts.tolist(), stops.tolist()) if math.isfinite(lo)]
    if len(found) <= 1:
        return f"within {money(found[0][0])}–{money(found[0][1])}" if found else "nowhere"
    longest = sorted(sorted(found, key=lambda stretch: stretch[0] - stretch[1])[:2])  # the two, left to right
    named = [f"{money(lo)}–{money(hi)}" for lo, hi in longest]
    more = len(found) - 2
    said = f"{named[0]}, {named[1]} (the two longest) and {more} more" if more else " and ".join(named)
    return f"in {NUMBER_WORDS.get(len(found), len(found))} stretches: {said}"


def _below_zero(diag, s):
    r, n = diag.results, diag.numbers
    parts = []
    if n["lowest_volume"][s] < 0:
        parts.append(f"{signed(n['lowest_volume'][s])} at price {money(n['lowest_at'][s])}")
    c = r.chosen[s]
    if math.isfinite(r.plan_price[s]) and r.plan_volume[s, c] < 0:
        parts.append(f"{signed(r.plan_volume[s, c])} at the plan price {money(r.plan_price[s])}")
    return "The chosen curve predicts negative volume: " + "; ".join(parts) + "."


def _outside_range(diag, s):
    r, n = diag.results, diag.numbers
    plan, lo, hi = r.plan_price[s], r.price_lo[s], r.price_hi[s]
    parts = []
    if math.isfinite(plan) and not lo <= plan <= hi:
        width = hi - lo
        beyond = plan - hi if plan > hi else lo - plan
        side, edge = ("above the highest", hi) if plan > hi else ("below the lowest", lo)
        size = f"{pct(beyond / width)} of the observed range" if width > 0 else f"{pct(beyond / edge)} of that price"
        parts.append(f"Plan price {money(plan)} is {money(beyond)} ({size}) {side} price observed ({money(edge)})")
    outside = n.get("control_outside")
    terms = np.flatnonzero(outside[s]) if outside is not None else np.zeros(0, np.int64)
    names = r.controls.names if len(terms) else ()
    first_season = len(names) - 2 * r.controls.season if len(terms) else 0  # the columns, then the season terms

    def seen(j):
        low, high = n["control_lo"][s, j], n["control_hi"][s, j]
        return fmt(low) if low == high else f"{fmt(low)} to {fmt(high)}"
    left_out = np.asarray(r.controls.left_out[s]) != 0 if len(terms) else np.zeros(0, bool)  # 0: KEPT
    missing = []  # a control the series' fit left out: its plan value moves nothing, it is no extrapolation
    for j in terms[terms < first_season]:
        said = (f"the plan's {names[j]} = {fmt(r.controls.plan[s, j])} lies outside the {names[j]} values this "
                f"series has seen ({seen(j)})")
        (missing if left_out[j] else parts).append(said)
    if len(terms[terms >= first_season]):  # one clause for the season, judged by the time of year
        parts.append(_season_outside(diag, s, first_season))
    text = "; ".join(parts) + ("; the prediction there is an extrapolation" if parts else "")
    if missing:
        which = [names[j] for j in terms[terms < first_season] if left_out[j]]
        text += ("; " if parts else "") + "; ".join(missing) + (
            f": {joined(which)} never varied in this series, so {'it was' if len(which) == 1 else 'they were'} "
            f"left out of its fit and {'its' if len(which) == 1 else 'their'} effect is not in the number "
            "(it is held at the values seen, whatever the plan says)")
    return f"{text[:1].upper()}{text[1:]}."


def _season_outside(diag, s, first):
    """The season's clause: the plan date's day and month, its distance in days from the nearest time of
    year the series has seen and the stretches its rows cover; or, without a plan date, that the year's
    average rests on rows not seen all year round."""
    from ..fit.controls import day_phase
    from .time_of_year import covered, day_month, days_apart, plan_phase
    r, days = diag.results, diag.thresholds.season_days
    date = r.data.date[r.data.offsets[s]:r.data.offsets[s + 1]]
    cover = covered(date, days)
    phase = float(plan_phase(*np.asarray(r.controls.plan[s, first:first + 2], dtype=float)))
    if math.isnan(phase):
        return (f"the season's average over the year (no plan date given) rests on a series not seen all year "
                f"round: its rows cover only {cover} of the year")
    apart = int(days_apart(day_phase(date), phase).min())
    return (f"the plan date ({day_month(phase)}) is {apart} days from the nearest time of year this series has "
            f"seen (more than season_days = {days}): its rows cover {cover} of the year")


def _price_gap(diag, s):
    r = diag.results
    plan, lo, hi = r.plan_price[s], r.price_lo[s], r.price_hi[s]
    gap = float(diag.numbers["plan_gap"][s])
    bar = pct(diag.thresholds.plan_gap)
    share = pct(gap) if pct(gap) != bar else f"just over {bar}"  # not "10%" for a gap beyond a 10% bar
    return (f"Plan price {money(plan)} lies in a gap between the prices observed: the nearest is "
            f"{money(gap * (hi - lo))} away ({share} of the observed range {money(lo)}–{money(hi)}), so the curve "
            "there rests on its shape, not on observations near it.")


# Sentences written for many series at once too (``sentence_columns``): one wording, filled either way.
# "about as well or better": a rival lower than the chosen one by more than its SE (the best, where the rule took a
# simpler one within one SE of it) is "close" too — "within one standard error" read wrong for it (a trial)
NEAR_TIE = ("{rival} fits about as well or better (CV MSE {rival_mse} vs {chosen_mse} ± {chosen_se}) and predicts "
            "{difference} {where}.")
# the difference as a share of the chosen curve's volume; as the two volumes where either is not above zero,
# or where one is more than NEAR_TIE_SHARE_UP_TO times the other (a share then read "83025% more volume")
NEAR_TIE_SHARE = "{change} {direction} volume than {chosen}"
NEAR_TIE_VOLUMES = "a volume of {rival_volume} where {chosen} predicts {chosen_volume}"
NEAR_TIE_SHARE_UP_TO = 2.0


def share_reads(rival_volume, chosen_volume):
    """Whether a near tie's difference is said as a share of the chosen volume (numbers or arrays alike):
    both volumes above zero, neither more than NEAR_TIE_SHARE_UP_TO times the other."""
    return ((np.minimum(rival_volume, chosen_volume) > 0) & (rival_volume <= NEAR_TIE_SHARE_UP_TO * chosen_volume)
            & (chosen_volume <= NEAR_TIE_SHARE_UP_TO * rival_volume))


AT_PLAN, AT_MID = "at the plan price {price}", "at mid-range price"
WEAK_FIT = ("Cross-validated R² (Q²) is {score}, below {wanted}: price explains little of the volume's "
            "variation.")
# price never varied: only a flat curve was fitted, and Q² judges the average volume (and any controls), not price
WEAK_FIT_NO_PRICE = ("Cross-validated R² (Q²) is {score}, below {wanted}: price never varied in this series, so the "
                     "flat curve (the average volume{controls}) is all there is, and it predicts held-out volumes "
                     "poorly.")


def _near_tie(diag, s):
    r, n = diag.results, diag.numbers
    c, other = int(r.chosen[s]), int(n["rival"][s])
    where = AT_PLAN.format(price=money(r.plan_price[s])) if math.isfinite(r.plan_price[s]) else AT_MID
    change, volumes = n["rival_change"][s], (n["rival_volume"][s], n["chosen_volume"][s])
    difference = (NEAR_TIE_SHARE.format(change=pct(abs(change)), direction="more" if change > 0 else "less",
                                        chosen=r.names[c]) if share_reads(*volumes) else
                  NEAR_TIE_VOLUMES.format(rival_volume=fmt(volumes[0]), chosen=r.names[c], chosen_volume=fmt(volumes[1])))
    return NEAR_TIE.format(rival=r.names[other], rival_mse=fmt(r.cv_mse[s, other]), chosen_mse=fmt(r.cv_mse[s, c]),
                           chosen_se=fmt(r.cv_se[s, c]), difference=difference, where=where)


def _unsteady(diag, s):
    r, n = diag.results, diag.numbers
    k = int(n["worst_fold"][s])
    errors = r.folds_of(s)[:, r.chosen[s]]
    return (f"Fold {k + 1} of {len(errors)} has {n['fold_ratio'][s]:.1f}× the median held-out error "
            f"(MSE {fmt(errors[k])} vs {fmt(float(np.median(errors)))}).")


WEAK_FIT_CONSTANT = ("Q² is undefined: volume never varies across the rows it is judged on (of {n} observations), "
                     "so no curve can be told from the average volume and price's effect on volume cannot be "
                     "estimated from these data.")


def _weak_fit(diag, s):
    score = float(diag.results.score[s])
    if not math.isfinite(score):  # the rows' values are not read: a writer may have freed them already
        return WEAK_FIT_CONSTANT.format(n=f"{int(diag.results.data.counts[s]):,}")
    bar = diag.thresholds.weak_score
    if unvaried(diag.results)[s]:
        return WEAK_FIT_NO_PRICE.format(score=pct_beside(score, bar), wanted=pct(bar),
                                        controls=with_controls(diag.results))
    return WEAK_FIT.format(score=pct_beside(score, bar), wanted=pct(bar))


def flat_chosen(results) -> np.ndarray:
    """(S,) whether each series' chosen curve is flat: a candidate with no price term (one coefficient)."""
    chosen = np.asarray(results.chosen)
    return (chosen >= 0) & (np.asarray(results.lineup.complexity)[np.maximum(chosen, 0)] <= 1)


def unvaried(results) -> np.ndarray:
    """(S,) whether price never varied in each series (one price: nothing measures a response to it)."""
    return np.asarray(results.price_hi) <= np.asarray(results.price_lo)


def with_controls(results) -> str:
    """" with the controls" where the fit holds controls, else ''."""
    return " with the controls" if results.controls is not None and len(results.controls.names) else ""


def _influential(diag, s):
    r, n = diag.results, diag.numbers
    data = r.data
    row = int(n["top_row"][s])
    where = f"{_row_word((data.source or {}).get('path'))} {int(data.line[row])}" if data.line is not None \
        else f"row {row + 1}"
    if data.date is not None:
        where += f", {np.datetime_as_string(data.date[row], unit='D')}"
    return (f"The observation on {where} (price {money(data.price[row])}, volume {fmt(data.volume[row])}) has "
            f"Cook's distance {n['top_cook'][s]:.2f}, above max(4/n, {diag.thresholds.cook_floor:g}) = "
            f"{n['cook_limit'][s]:.2f} (a common rule of thumb).")


@functools.lru_cache(maxsize=8)
def _row_word(path: str | None) -> str:
    """How a data row is placed: a text file's ``line``, a Parquet file's (or folder's) ``row`` — as the loader's
    errors place them ("on line 3930558" of a Parquet file read as a line of text; a trial)."""
    from ..data.columns import is_parquet_name
    return "row" if path and (is_parquet_name(path) or Path(path).is_dir()) else "line"


def _price_tied(diag, s):
    r, n = diag.results, diag.numbers
    name = r.controls.names[int(n["tied"][s])]
    vif = n["price_vif"][s]
    if math.isfinite(vif):
        how = (f"Price moved so closely with {name} (variance inflation of price {ratio(vif)}, above "
               f"{diag.thresholds.price_tied_vif:g}) that")
    else:
        how = f"Price moved exactly with {name}, so"
    c = int(r.chosen[s])
    if c >= 0 and flat_chosen(r)[s]:  # no slope to share: the curve chose none, and the control took it
        j = int(n["tied"][s])
        effect = ""
        if j >= 0:  # a flat curve adds its terms in volume units (``control_words`` says them so too)
            per = "" if r.controls.binary[j] else " per 1.00 more"
            effect = f" ({name}: {signed(float(r.controls.coef[s, c, j]))} units{per} with the fitted curve)"
        return (f"{how} the price effect cannot be told apart from {name}'s: the chosen curve ({r.names[c]}) is flat, "
                f"so its elasticity 0 is the model's choice, not a measurement; the price effect may sit in "
                f"{name}'s fitted term{effect}.")
    return f"{how} the price effect cannot be told apart from {name}'s: the curve's slope may belong to either."


def _shifted(diag, s):
    bt = diag.numbers["backtest"]
    chosen = int(diag.results.chosen[s])
    return shift_sentence(bt.record(s), diag.results.names[chosen] if chosen >= 0 else None)


WHY_UNTESTED = {"no-dates": "these results were fitted without dates (no --date column), so no backtest is possible",
                "no-new-rows": "no rows are dated after the signed data's last date, so there is nothing to backtest",
                "unsigned": "the decision was recorded without its model, so no backtest is possible",
                "undated": "the signed data had no dates, so no backtest is possible",
                "controls-changed": "it was signed with other controls (or season terms) than this fit holds "
                                    "fixed, so it is not the same model and is not carried: look again",
                "weights-changed": "it was signed with other weights than this fit's{weighting}, so it is not the "
                                   "same model and is not carried: look again"}


def shift_sentence(bt: dict, proposal: str | None, older: bool = False) -> str:
    """The signed curve, its backtest on the rows since, and this cycle's ``proposal`` beside it, in
    numbers, from a series' stored backtest (``fitcore.ledger.backtest.Backtest.record``).  ``older``: the
    results are older than the data the standing decision was made on (``rules.decided_on_newer``), so their
    proposal is not this cycle's and is not called so."""
    from ..text import clean

    def number(name):
        value = bt.get(name)
        return math.nan if value is None else value

    where = money(number("price")) + ("" if bt.get("planned") else " (mid-range; no plan price)")
    band = f" ({span(number('signed_lo'), number('signed_hi'))})" if bt.get("signed_lo") is not None else ""
    signed_at = number("signed_price")  # the plan price it was signed at (unknown in results made before)
    head = f"{signed_by(bt)}: {clean(str(bt['candidate']))}"
    fitted_over = (f"{money(number('signed_price_lo'))}–{money(number('signed_price_hi'))}"
                   if bt.get("signed_price_lo") is not None and bt.get("signed_price_hi") is not None else None)
    beyond = (f", an extrapolation beyond the prices {fitted_over} it was signed on"
              if fitted_over and outside_prices(number("price"), number("signed_price_lo"), number("signed_price_hi"))
              else "")
    if bt.get("signed_volume") is None:
        parts = [head + "."]
    elif not math.isfinite(signed_at) or math.isclose(signed_at, number("price"), rel_tol=1e-12, abs_tol=0.0):
        parts = [f"{head}, {fmt(number('signed_volume'))}{band} at {where}{beyond}."]
    else:  # signed at another price: what was signed there, then the signed curve where this cycle looks
        signed_band = (f" ({span(number('signed_plan_lo'), number('signed_plan_hi'))})"
                       if bt.get("signed_plan_lo") is not None else "")
        said = (f", {fmt(number('signed_plan_volume'))}{signed_band} at {money(signed_at)}"
                if bt.get("signed_plan_volume") is not None else f" at {money(signed_at)}")
        now = "this plan's price " if bt.get("planned") else ""
        parts = [f"{head}{said}; at {now}{where} the signed curve gives {fmt(number('signed_volume'))}{band}"
                 f"{beyond}."]
    n = bt.get("new_rows") or 0
    gone = bt["status"] == "history-changed"
    if bt.get("revised"):
        parts.append(history_sentence(bt))
    if bt["status"] in ("passed", "failed") or (gone and n):
        tail = (f"{bt['outside']} of {n} fell outside its band" if bt.get("outside") is not None
                else "its band was not recorded")
        whose = "the carried refit's error" if bt.get("carried_analyst") else "its error"
        away = bt.get("rows_outside") or 0
        which = "" if n == 1 else "all " if away == n else f"{away} of them "
        aside = f" ({which}priced outside the {fitted_over} it was signed on, where its band is wide)" \
            if away and fitted_over else ""
        parts.append(f"On the {n} {'observation' if n == 1 else 'observations'} since{aside}, {whose} is "
                     f"{number('error_ratio'):.1f}× its CV error and {tail}.")
    elif not gone:
        how = f" ({clean(str(bt['weighting']))})" if bt.get("weighting") else ""
        why = WHY_UNTESTED.get(bt["status"], bt["status"]).replace("{weighting}", how)
        parts.append(why[0].upper() + why[1:] + ".")
    if proposal is not None and bt.get("proposed_volume") is not None:
        again = "" if bt.get("shape_changed") else " again"
        proposed = number("proposed_volume")
        flat = "poly0" in (str(bt.get("candidate")), str(proposal))  # a flat curve's 0 measures nothing (a trial)
        beside = _beside_signed(proposed, number("signed_volume"), number("volume_change"),
                                math.nan if flat else number("elasticity_change"))
        whose = "The proposal of these older results" if older else "This cycle's proposal"
        parts.append(f"{whose}, {proposal}{again}, predicts {fmt(proposed)} ({beside}).")
    return " ".join(parts)


def signed_by(bt: dict) -> str:
    """Who signed the curve a backtest tests, and when: "Signed 2026-12-03 by ana"; for a standing carry, whose
    decision it carries and who carried it ("Accepted 2026-12-03 by ana, carried 2026-12-05 by bo": the carry
    is the refit of ana's accept on the data it was carried to)."""
    from ..text import clean
    at, who = clean(str(bt["signed_at"])), clean(str(bt["analyst"]))
    if not bt.get("carried_analyst"):
        return f"Signed {at} by {who}"
    done = {"accept": "Accepted", "override": "Overridden"}.get(bt.get("carried_action"), "Signed")
    return f"{done} {clean(str(bt.get('carried_at')))} by {clean(str(bt['carried_analyst']))}, carried {at} by {who}"


def history_sentence(bt: dict) -> str:
    """What became of the rows a signed curve was made on, where they no longer hash as they did
    (``fitcore.ledger.backtest``: ``revised``): still fitted by it, or gone (``history-changed``)."""
    from ..text import clean
    rows, ratio = bt.get("history_rows") or 0, bt.get("history_ratio")
    upto = f"dated up to {clean(str(bt.get('last_date')))}"
    if not rows:
        return (f"None of the rows {upto} (the data it was signed on) are in these data any more, so the rows since "
                "cannot vouch for it: look again.")
    signed = bt.get("signed_rows")
    them = f"the {signed:,} it was signed on" if isinstance(signed, int) and signed >= 0 else "the rows it was signed on"
    what = f"The {rows:,} {'row' if rows == 1 else 'rows'} {upto} are not {them} (restated, added, dropped or " \
           "re-dated since)"  # not "reordered": dated rows are read in date order, whatever the file's
    if bt["status"] == "history-changed":
        return (f"{what}, and its error on them is {fmt_ratio(ratio)}× its CV error: the history it was signed on "
                "has changed, so the rows since cannot vouch for it; look again.")
    return (f"{what}; it still fits them: its error there is {fmt_ratio(ratio)}× its CV error (carried only by "
            "ledger carry --carry-revised, as for a rolling window's oldest weeks dropped).")


def _beside_signed(proposed: float, signed_volume: float, change: float, tilt: float) -> str:
    """The proposal's volume beside the signed curve's, as changes ("+0.29" next to a proposal whose own
    elasticity is −1.75 read as its level); at a volume at or below zero neither a share nor an
    elasticity means anything: the signed curve's volume instead."""
    if not (proposed > 0 and signed_volume > 0):
        return f"the signed curve: {fmt(signed_volume)}; no elasticity at a volume at or below zero"
    moved = round(change * 100) if math.isfinite(change) else None
    moved_text = "n/a" if moved is None else f"{'+' if moved > 0 else '−' if moved < 0 else ''}{abs(moved)}%"
    # an elasticity's change in an elasticity's format (two decimals: "+0.0831" read beside "-1.60" on the same block)
    tilt_text = "" if not math.isfinite(tilt) else "; its elasticity is the same" if two_places(abs(tilt)) == "0.00" \
        else f"; its elasticity differs by {'+' if tilt > 0 else '−'}{two_places(abs(tilt))}"
    return f"{moved_text} on the signed curve{tilt_text}"


def _stale(diag, s):
    return "The data behind the last sign-off have changed."


SENTENCES = {
    "few-points": _few_points, "no-model": _no_model, "flat-price": _flat_price, "rising": _rising,
    "below-zero": _below_zero, "outside-range": _outside_range, "price-gap": _price_gap, "near-tie": _near_tie,
    "unsteady-folds": _unsteady,
    "weak-fit": _weak_fit, "influential-point": _influential, "price-tied": _price_tied, "shifted": _shifted,
    "stale": _stale,
}
