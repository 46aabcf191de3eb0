"""Signed curves against the data that arrived since: the backtest and the shift, for every series at once.

For each series whose standing decision (accept, override or carry) was made on other data, the
signed model (the decision's ``signed`` snapshot) is evaluated on the rows dated after the signed
data's last date: how many there are, its RMSE on them over its CV RMSE at sign-off
(``error_ratio``), and the share of them inside its 95% prediction interval (``coverage``).  The
shift compares this cycle's proposal with the signed model at the same price (the plan price, or
the middle of the observed prices without one): volume change (share), elasticity change, and
whether the shape changed.  ``shifted`` is raised when the backtest fails or the volume moved too far
(thresholds ``shift_error_ratio``, ``shift_coverage`` judged from ``shift_min_rows`` new rows,
``shift_volume``), or the history it was signed on changed:

Where the rows dated up to the signed data's last date are not those it was signed on (``revised``:
``fitcore.ledger.history``), the signed curve is measured on them as they are now (``history_ratio``: its
RMSE there over its CV RMSE); beyond ``shift_error_ratio`` the history it was signed on is gone
(``history-changed``): the rows since cannot vouch for it, ``shifted`` is raised and carry leaves it to a
human.  A revision that fits (a rolling window's oldest rows dropped; rows re-dated past the signed date,
which would also pass for rows since) is left to a human too unless carry is told otherwise
(``due.left_for_human``'s ``revised_ok``).  Only series with rows since are checked: without any there is no
backtest to mislead.

A curve signed with other weights than this fit's (added, dropped, another column) is another model, as one
signed with other controls is: ``weights-changed`` (``controls-changed``), never carried, its rows not
called revised (the fingerprint hashes the weights, so they would be).  A decision signed before snapshots
recorded their weighting is taken as signed with this fit's weighting where its rows still hash as signed
(the weights are hashed), else as signed unweighted: so an unweighted cycle after it is judged as before,
and a weighted one whose rows no longer hash as signed is ``weights-changed``.  Changes carried across are
said (``due.carried_across``): another plan price than signed, other CV settings (``settings_changed``).

Only the ledger's records are read one by one (they are dicts); every number is computed over all
series at once, grouped by the signed curve's family and size.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..data.keys import SeriesKeys
from ..fit.basis import polynomial
from ..fit.families import BY_NAME
from ..fit.results import Results
from .due import (CONTROLS_CHANGED, FAILED, HISTORY_CHANGED, NO_DATES, NO_NEW_ROWS, PASSED, UNDATED, UNSIGNED,
                  WEIGHTS_CHANGED, due)
from .history import dated_rows, history_fit
from .history import revised as signed_rows_revised
from .snapshot import CV_SETTINGS, evaluate, fit_terms_of, terms
from .standing import Standing, standing_of



@dataclass(frozen=True, eq=False)
class Backtest:
    """Per series (S,): the standing decision tested and what the test found (see the module doc).

    Text (object arrays, None where nothing is tested): ``status``, ``decision`` (digest of the
    standing decision), ``carries`` (the accept or override it stands for: itself, or what a carry
    carries), ``latest`` (digest of the series' latest record when tested), ``analyst``,
    ``signed_at`` (its date), ``candidate``, ``last_date`` (of the signed data).  Numbers (NaN or
    -1 where not known): ``new_rows``, ``error_ratio``, ``coverage``, ``outside``, ``signed_volume``,
    ``signed_lo``, ``signed_hi`` (the signed curve at ``price``), ``signed_price``, ``signed_plan_volume``,
    ``signed_plan_lo``, ``signed_plan_hi`` (what was signed: the plan price then and the curve there),
    ``volume_change``, ``elasticity_change``; ``shape_changed``, ``shifted``, ``signed_near_best`` (bool: the
    signed candidate is available in this fit and within one SE of its lowest CV error, so an override of it
    is carried under another proposal).  ``revised`` (bool: the rows up to ``last_date`` do not hash to the
    decision's fingerprint), ``history_rows`` (those rows now, -1 where not revised), ``signed_rows`` (the rows
    signed, -1 where not known or not revised), ``history_ratio`` (the
    signed curve's RMSE on them over its CV RMSE; NaN where not revised).  ``weighting`` (text, where
    ``weights-changed``: "unweighted → weighted by w"), ``settings_changed`` (text: "folds 5 → 10, rule one-se →
    lowest", where the signed snapshot records other CV settings than this fit's).  For a standing carry, the
    accept or override it carries (``analyst`` and ``signed_at`` are the carry's): ``carried_action``,
    ``carried_analyst``, ``carried_at``.  ``source``: the ledger and its head.
    """

    source: dict
    status: np.ndarray
    decision: np.ndarray
    carries: np.ndarray
    latest: np.ndarray
    analyst: np.ndarray
    signed_at: np.ndarray
    candidate: np.ndarray
    last_date: np.ndarray
    new_rows: np.ndarray
    error_ratio: np.ndarray
    coverage: np.ndarray
    outside: np.ndarray
    price: np.ndarray
    signed_volume: np.ndarray
    signed_lo: np.ndarray
    signed_hi: np.ndarray
    signed_price: np.ndarray
    signed_plan_volume: np.ndarray
    signed_plan_lo: np.ndarray
    signed_plan_hi: np.ndarray
    proposed_volume: np.ndarray
    volume_change: np.ndarray
    elasticity_change: np.ndarray
    shape_changed: np.ndarray
    shifted: np.ndarray
    signed_near_best: np.ndarray
    revised: np.ndarray
    history_rows: np.ndarray
    signed_rows: np.ndarray
    history_ratio: np.ndarray
    weighting: np.ndarray
    settings_changed: np.ndarray
    carried_action: np.ndarray
    carried_analyst: np.ndarray
    carried_at: np.ndarray
    planned: np.ndarray
    chosen: np.ndarray
    signed_price_lo: np.ndarray  # the prices the signed curve was fitted over (its window)
    signed_price_hi: np.ndarray
    rows_outside: np.ndarray  # of the rows since, how many are priced outside them (-1: none tested)

    STORED = ("status", "decision", "latest", "carries", "analyst", "signed_at", "candidate", "last_date",
              "new_rows", "error_ratio", "coverage", "outside", "price", "planned", "signed_volume", "signed_lo",
              "signed_hi", "signed_price", "signed_plan_volume", "signed_plan_lo", "signed_plan_hi", "proposed_volume",
              "volume_change", "elasticity_change", "shape_changed", "shifted", "signed_near_best", "revised",
              "history_rows", "signed_rows", "history_ratio", "weighting", "settings_changed", "carried_action",
              "carried_analyst", "carried_at", "signed_price_lo", "signed_price_hi", "rows_outside")

    def columns(self) -> dict:
        return {name: getattr(self, name) for name in self.STORED}

    def record(self, s: int) -> dict | None:
        """Series ``s``'s backtest as a results file holds it (None: nothing tested)."""
        if self.status[s] is None:
            return None
        out = {}
        for name in self.STORED:
            value = getattr(self, name)[s]
            if isinstance(value, (np.floating, float)):
                value = float(value) if np.isfinite(value) else None
            elif isinstance(value, (np.bool_, bool)):
                value = bool(value)
            elif isinstance(value, (np.integer, int)):
                value = int(value) if value >= 0 else None
            out[name] = value
        return out

    def due(self, s: int, stops=(), has_model: bool = True, kept_override: bool | None = None) -> str | None:
        return due(self.record(s), stops, has_model, kept_override)

    def counts(self) -> dict[str, int]:
        values, counts = np.unique(np.array([v for v in self.status if v is not None], dtype=object).astype(str),
                                   return_counts=True)
        return dict(zip(values.tolist(), counts.tolist()))


def on_other_data(standing: Standing, keys: SeriesKeys, fingerprints) -> tuple[np.ndarray, Standing]:
    """(series indices, their standing decisions) for every series of ``keys`` whose standing decision
    was made on data other than ``fingerprints``."""
    if not len(standing):
        return np.zeros(0, np.int64), standing
    at = keys.indices_of(standing.series)
    found = np.flatnonzero(at >= 0)
    index = at[found]
    now = np.asarray(fingerprints, dtype=object)[index] if not hasattr(fingerprints, "take") else \
        np.array(fingerprints.take(index).to_pylist() + [None], dtype=object)[:-1]
    moved = np.flatnonzero(standing.fingerprint[found] != now)
    return index[moved], standing.take(found[moved])


def backtest(results: Results, standing, thresholds, source: dict) -> Backtest:
    """The backtest of every series of ``results`` (a fit with its rows) against the ledger's standing
    decisions (a ``Standing``, or a ledger's histories)."""
    if not isinstance(standing, Standing):
        standing = standing_of(standing)
    n_s = results.n_series
    text = lambda: np.full(n_s, None, dtype=object)  # noqa: E731
    number = lambda: np.full(n_s, np.nan)  # noqa: E731
    out = dict(status=text(), decision=text(), carries=text(), latest=text(), analyst=text(), signed_at=text(),
               candidate=text(), last_date=text(), new_rows=np.full(n_s, -1, np.int64), error_ratio=number(),
               coverage=number(), outside=np.full(n_s, -1, np.int64), price=number(), signed_volume=number(),
               signed_lo=number(), signed_hi=number(), signed_price=number(), signed_plan_volume=number(),
               signed_plan_lo=number(), signed_plan_hi=number(), proposed_volume=number(), volume_change=number(),
               elasticity_change=number(), shape_changed=np.zeros(n_s, bool), signed_near_best=np.zeros(n_s, bool),
               revised=np.zeros(n_s, bool), history_rows=np.full(n_s, -1, np.int64),
               signed_rows=np.full(n_s, -1, np.int64), history_ratio=number(), weighting=text(),
               settings_changed=text(), carried_action=text(), carried_analyst=text(), carried_at=text(),
               signed_price_lo=number(), signed_price_hi=number(), rows_outside=np.full(n_s, -1, np.int64))
    series, mine = on_other_data(standing, SeriesKeys.of(results.data), results.data.fingerprints)
    reweighted = np.zeros(0, np.int64)
    if len(series):
        _fill(out, results, series, mine)
        reweighted = _weights_changed(out, results, series, mine)
    failed = out["status"] == FAILED
    with np.errstate(invalid="ignore"):
        failed |= (out["status"] == PASSED) & ((out["error_ratio"] > thresholds.shift_error_ratio) | (
            (out["new_rows"] >= thresholds.shift_min_rows) & (out["coverage"] < thresholds.shift_coverage)))
        out["status"][failed] = FAILED
        shifted = failed | (np.abs(out["volume_change"]) > thresholds.shift_volume)
        gone = out["revised"] & ~(out["history_ratio"] <= thresholds.shift_error_ratio)  # NaN: no row left to fit
    gone &= np.isin(out["status"], [PASSED, FAILED, NO_NEW_ROWS])  # (never a reweighted one: not revised)
    out["status"][gone] = HISTORY_CHANGED
    shifted |= gone  # the signed curve no longer describes its own rows: flagged, whatever the volume says
    if len(series):
        out["status"][reweighted] = WEIGHTS_CHANGED
        now = "|".join(terms(results) or ())
        out["status"][series[(mine.controls != now) & mine.signed]] = CONTROLS_CHANGED
    return Backtest(source=source, shifted=shifted, planned=np.isfinite(results.plan_price),
                    chosen=np.asarray(results.chosen), **out)


def _weights_changed(out: dict, results: Results, series: np.ndarray, st: Standing) -> np.ndarray:
    """The series (indices) whose signed curve was fitted with other weights than ``results`` (see the module
    doc for a snapshot that predates the record), their ``weighting`` said and their rows no longer called
    revised (the weights are hashed); the CV settings that differ said as ``settings_changed``."""
    fitted = fit_terms_of(results)
    now = fitted["weight"] or ""
    recorded = st.weight != None  # noqa: E711  (object array)
    changed = st.signed & np.where(recorded, st.weight != now, (now != "") & out["revised"][series])
    said = lambda w: "unweighted" if not w else f"weighted by {w}"  # noqa: E731
    for i in np.flatnonzero(changed).tolist():
        before = said(st.weight[i]) if recorded[i] else "not recorded, its rows changed"
        out["weighting"][series[i]] = f"{before} → {said(now)}"
    at = series[changed]
    out["revised"][at], out["history_rows"][at], out["signed_rows"][at], out["history_ratio"][at] = False, -1, -1, np.nan
    for i, cv in enumerate(st.cv.tolist()):
        if isinstance(cv, dict):
            moved = [f"{name.replace('_', ' ')} {cv.get(name)} → {fitted['cv'][name]}" for name in CV_SETTINGS
                     if cv.get(name) != fitted["cv"][name]]
            out["settings_changed"][series[i]] = ", ".join(moved) or None
    return at


def _fill(out: dict, results: Results, series: np.ndarray, st: Standing) -> None:
    for name in ("decision", "carries", "latest", "analyst", "signed_at", "candidate", "carried_action",
                 "carried_analyst", "carried_at"):
        out[name][series] = getattr(st, name)
    out["status"][series] = UNSIGNED
    keep = np.flatnonzero(st.signed)
    if not len(keep):
        return
    series, st = series[keep], st.take(keep)
    for name in ("price", "volume", "lo", "hi"):
        out["signed_price" if name == "price" else f"signed_plan_{name}"][series] = getattr(st, f"plan_{name}")
    last = st.last_date
    out["last_date"][series] = np.where(np.isnat(last), None, np.datetime_as_string(last, unit="D").astype(object))
    dates = results.data.date
    out["status"][series] = NO_DATES if dates is None else np.where(np.isnat(last), UNDATED, NO_NEW_ROWS)
    revised = (signed_rows_revised(results.data, series, last, st.fingerprint) if dates is not None
               else np.zeros(len(series), bool))
    price = np.where(np.isfinite(results.plan_price[series]), results.plan_price[series], results.mid[series])
    out["price"][series] = price
    proposed, proposed_el = _proposal_at(results, series, price)
    out["proposed_volume"][series] = proposed
    names = np.array(results.names + [None], dtype=object)
    out["shape_changed"][series] = names[results.chosen[series]] != st.candidate
    out["signed_near_best"][series] = _near_best(results, series, st.candidate)
    for family_name in np.unique(st.family.astype(str)).tolist():
        for k in np.unique(st.size[st.family == family_name]).tolist():
            members = np.flatnonzero((st.family == family_name) & (st.size == k))
            curve = _SignedCurves(st.take(members), BY_NAME[family_name], int(k))
            at = series[members]
            volume, lo, hi, elasticity = curve.at(price[members])
            out["signed_price_lo"][at], out["signed_price_hi"][at] = curve.prices()
            out["signed_volume"][at], out["signed_lo"][at], out["signed_hi"][at] = volume, lo, hi
            with np.errstate(divide="ignore", invalid="ignore"):
                out["volume_change"][at] = (proposed[members] - volume) / np.abs(volume)
                out["elasticity_change"][at] = proposed_el[members] - elasticity
            if dates is not None:
                _test_rows(out, results, at, last[members], curve)
                # only where rows since would vouch for it: data without any (older results, the same rows
                # in another order) are not tested at all, and "decided on newer data" says the rest
                revised[members] &= out["new_rows"][at] > 0
                _test_history(out, results.data, at, last[members], curve, revised[members])
    out["revised"][series] = revised


class _SignedCurves:
    """n signed curves of one family and size, as arrays."""

    def __init__(self, st: Standing, family, k: int) -> None:
        self.family = family
        self.coef, self.cov = st.coef[:, :k], st.cov[:, :k, :k]
        self.mid, self.half, self.smear, self.sigma2 = st.mid, st.half, st.smear, st.sigma2
        self.df = np.where(np.isfinite(st.df), st.df, 1).astype(np.int64)
        self.level = np.where(np.isfinite(st.level), st.level, 0.95)
        self.cv_mse = st.cv_mse
        self.n = st.n

    def prices(self) -> tuple[np.ndarray, np.ndarray]:
        """The lowest and highest price each curve was fitted over (its window's ends, in prices)."""
        with np.errstate(over="ignore", invalid="ignore"):
            return self.family.price_of(self.mid - self.half), self.family.price_of(self.mid + self.half)

    def outside(self, price: np.ndarray, which: np.ndarray) -> np.ndarray:
        """Whether ``price[i]`` lies outside the prices curve ``which[i]`` was fitted over."""
        from ..fit.basis import outside_prices
        lo, hi = self.prices()
        return outside_prices(price, lo[which], hi[which])

    def at(self, price: np.ndarray, which: np.ndarray | None = None):
        """(volume, lo, hi, elasticity) of curve ``which[i]`` (default: i) at ``price[i]``."""
        w = np.arange(len(self.mid)) if which is None else which
        result = [np.full(len(w), np.nan) for _ in range(4)]
        for level in np.unique(self.level[w]):  # one level in practice (0.95)
            mine = self.level[w] == level
            values = evaluate(self.family, self.coef[w][mine], self.mid[w][mine], self.half[w][mine],
                              self.smear[w][mine], self.cov[w][mine], self.sigma2[w][mine], self.df[w][mine],
                              price[mine], float(level))
            for column, value in zip(result, values):
                column[mine] = value
        return result


def _test_history(out: dict, data, series: np.ndarray, last: np.ndarray, curve: _SignedCurves,
                  revised: np.ndarray) -> None:
    """Where the rows up to ``last`` were ``revised`` (``history``): how many there are now, how many were signed,
    and the signed curve's RMSE on them over its CV RMSE."""
    which = np.flatnonzero(revised)
    if not len(which):
        return
    rows, ratio = history_fit(data, series[which], last[which], curve, which)
    out["history_rows"][series[which]], out["history_ratio"][series[which]] = rows, ratio
    out["signed_rows"][series[which]] = curve.n[which]


def _test_rows(out: dict, results: Results, series: np.ndarray, last: np.ndarray, curve: _SignedCurves) -> None:
    """The signed curves on their series' rows dated after ``last``: count, error ratio, coverage."""
    data = results.data
    rows, owner = dated_rows(data, series, last, after=True)
    count = np.bincount(owner, minlength=len(series))
    tested = count > 0
    out["new_rows"][series] = count
    out["status"][series[tested]] = PASSED
    if not len(rows):
        return
    volume, lo, hi, _ = curve.at(data.price[rows], owner)
    actual = data.volume[rows]
    with np.errstate(invalid="ignore", divide="ignore"):
        rmse = np.sqrt(np.bincount(owner, (volume - actual) ** 2, minlength=len(series)) / np.maximum(count, 1))
        inside = np.bincount(owner, (lo <= actual) & (actual <= hi), minlength=len(series))
        banded = np.isfinite(curve.cov).all(axis=(1, 2)) & np.isfinite(curve.sigma2)
        at = series[tested]
        out["error_ratio"][at] = (rmse / np.sqrt(curve.cv_mse))[tested]
        out["coverage"][at] = np.where(banded, inside / np.maximum(count, 1), np.nan)[tested]
        out["outside"][at] = np.where(banded, count - inside, -1)[tested]
    out["rows_outside"][series] = np.where(tested, np.bincount(owner, curve.outside(data.price[rows], owner),
                                                               minlength=len(series)), -1)


def _near_best(results: Results, series: np.ndarray, candidate: np.ndarray) -> np.ndarray:
    """Each series' ``candidate`` (names) is available in ``results`` and its CV error within one SE of the lowest."""
    c = np.array([results.names.index(n) if n in results.names else -1 for n in candidate.tolist()], dtype=np.int64)
    cv_mse, cv_se = np.asarray(results.cv_mse, dtype=float)[series], np.asarray(results.cv_se, dtype=float)[series]
    available = np.asarray(results.available)[series]
    errors = np.where(available, cv_mse, np.inf)
    rows, at = np.arange(len(series)), np.maximum(c, 0)
    best = np.argmin(errors, axis=1) if len(series) else np.zeros(0, np.int64)
    with np.errstate(invalid="ignore"):
        return (c >= 0) & available[rows, at] & (cv_mse[rows, at] <= errors[rows, best] + np.nan_to_num(cv_se[rows, best]))


def _proposal_at(results: Results, series: np.ndarray, price: np.ndarray):
    """(volume, elasticity) of each series' chosen curve at ``price`` (NaN where none is chosen)."""
    volume, elasticity = np.full(len(series), np.nan), np.full(len(series), np.nan)
    chosen = results.chosen[series]
    for c in np.unique(chosen[chosen >= 0]).tolist():
        mine = np.flatnonzero(chosen == c)
        s, k = series[mine], results.candidates[c].complexity
        family = results.family_of(c)
        t = family.coordinate(price[mine], results.basis_mid[s, c], results.basis_half[s, c])
        coef = np.asarray(results.coef[s, c, :k], dtype=float)
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            v = family.volume(polynomial(coef, t), results.smear[s, c])
            volume[mine] = v
            elasticity[mine] = family.elasticity(polynomial(coef, t, 1), v, results.basis_half[s, c], price[mine])
    return volume, elasticity


class StoredBacktest:
    """The backtest a results file holds (``fit --ledger``), read back per series as ``Backtest.record``."""

    def __init__(self, columns: dict) -> None:
        self.columns = columns

    def record(self, s: int) -> dict | None:
        if self.columns["status"][s] is None:
            return None
        out = {}
        for name, values in self.columns.items():
            value = values[s]
            if isinstance(value, (float, np.floating)):
                value = float(value) if np.isfinite(value) else None
                if value is not None and name in ("new_rows", "outside", "rows_outside"):
                    value = int(value)
            elif isinstance(value, np.bool_):
                value = bool(value)
            out[name] = value
        return out

    def due(self, s: int, stops=(), has_model: bool = True, kept_override: bool | None = None) -> str | None:
        return due(self.record(s), stops, has_model, kept_override)


def within_one_se(cv_mse: np.ndarray, cv_se: np.ndarray, available: np.ndarray, c: int) -> bool:
    """Candidate ``c`` of one series (its candidates' CV errors, SEs, availability) is available and within one
    SE of the lowest CV error: an override that stays so is carried under another proposal."""
    errors = np.where(available, cv_mse, np.inf)
    best = int(np.argmin(errors))
    return bool(available[c] and cv_mse[c] <= errors[best] + (cv_se[best] if np.isfinite(cv_se[best]) else 0.0))


def cycle_of(results: Results, diagnosis, histories: dict, source: dict):
    """``(diagnosis with 'shifted', backtest)`` for a screen: computed from the rows when they are loaded,
    else the backtest the results file holds (None when it holds none: ``diagnosis`` as it is)."""
    from ..review.flags import mark_shifted
    if results.rows_loaded:
        found = backtest(results, histories, diagnosis.thresholds, source)
        return mark_shifted(diagnosis, found), found
    stored = getattr(results, "stored_backtest", None)
    return diagnosis, (StoredBacktest(stored) if stored else None)
