"""The model as it stood when signed: the ``signed`` object of a ``pricefold-ledger/2`` decision.

Enough to evaluate the signed curve later without the results it came from: its family and
coefficients (plain units, and in its own basis with the window), Duan's smearing for the log
families, what an interval at a new price needs (``cov_unscaled`` = (XᵀWX)⁻¹ in the basis, σ², df),
the data it was fitted on (n, price range, last date), its CV error, and its prediction at the
plan price.  Built for many series at once (``snapshots``), from ``Results`` (``from_results``)
or from results records in the JSON layout (``from_records``).  Pure: arrays in, dicts out.

A decision taken where the interval parts are not known (results read back from a file written
before they were stored, before the rows arrived, or with controls before ``cov_unscaled`` was the
full design's at the plan's control values) records ``null`` for them and says so in
``incomplete``; such a snapshot is never taken for complete (the backtest then tests the curve
but not its band).  With controls a snapshot says ``cov_at_plan_controls``: one signed without it
(before then) holds the price columns' own matrix, and its readers take it for incomplete
(``interval_cov``).

What a later sign-off needs to know of the fit beyond its curve (``fitted``): the weight column it was
fitted with (``weight``: its name, null unweighted; another weighting is another model, as other controls
are) and how its shape was chosen (``cv``: folds, fold order, seed, rule; a carry under other ones says so).
A snapshot signed before they were recorded has neither key (``fitcore.ledger.backtest`` says how such a
decision is judged).
"""
from __future__ import annotations

import math

import numpy as np

from ..fit.families import BY_NAME, Family
from ..fit.results import Results
from ..review.intervals import covariances, last_dates

INCOMPLETE = ("the interval parts (cov_unscaled, sigma2, df) were not known when this was signed "
              "(results read without their rows, written before they were stored, or with controls written "
              "before cov_unscaled held them at the plan's values)")


def _old_controls(snapshot: dict) -> bool:
    """Signed with controls before ``cov_unscaled`` held them at the plan's values: the price columns' own
    matrix, and intervals from it too narrow."""
    return bool(snapshot.get("controls")) and not snapshot.get("cov_at_plan_controls")


def interval_cov(snapshot: dict):
    """A signed snapshot's ``cov_unscaled`` where it can be used (None: ``_old_controls``, or none recorded)."""
    return None if _old_controls(snapshot) else snapshot.get("cov_unscaled")


def signed_plan(snapshot: dict) -> dict:
    """A signed snapshot's plan numbers ({} without), its interval none where it came from an unusable
    matrix (``_old_controls``): an interval not known rather than a wrong one."""
    plan = snapshot.get("plan") if isinstance(snapshot.get("plan"), dict) else {}
    return {**plan, "lo": None, "hi": None} if plan and _old_controls(snapshot) else plan


def _nums(values) -> list:
    """``values`` (n,) as a list of floats, None where not finite."""
    values = np.asarray(values, dtype=float)
    out = values.tolist()
    for i in np.flatnonzero(~np.isfinite(values)).tolist():
        out[i] = None
    return out


def _rows(values: np.ndarray, finite: np.ndarray) -> list:
    """``values`` (n, …) as nested lists, NaN as None (rows all finite go as they are)."""
    out = values.tolist()
    for i in np.flatnonzero(~finite).tolist():
        out[i] = [_nums(v) for v in out[i]] if values.ndim == 3 else _nums(out[i])
    return out


def evaluate(family: Family, coef, mid, half, smear, cov, sigma2, df, price, level):
    """(volume, lo, hi, elasticity) of n signed curves, each at its own ``price`` (n,): ``coef`` (n, k)
    in the basis, ``cov`` (n, k, k) unscaled (NaN: bounds NaN).  The same interval as the engine's."""
    coef = np.asarray(coef, dtype=float)
    t = family.coordinate(np.asarray(price, dtype=float), mid, half)
    powers = t[:, None] ** np.arange(coef.shape[1])[None, :]
    with np.errstate(invalid="ignore", over="ignore"):
        leverage = np.einsum("ni,nij,nj->n", powers, cov, powers)
    return family.at(coef, mid, half, smear, leverage, sigma2, df, price, level)


def at_prices(snaps: list[dict], prices, level: float) -> list[dict]:
    """Each signed curve of ``snaps`` at its own price of ``prices``: ``{"volume", "lo", "hi", "elasticity"}``,
    None where not finite (no interval where a snapshot lacks its interval parts), all those of one family and
    basis size at once; the interval at the level each was signed at (``level`` where it says none)."""
    out: list[dict] = [{} for _ in snaps]
    groups: dict[tuple, list[int]] = {}
    for i, sn in enumerate(snaps):
        groups.setdefault((sn["family"], len(sn["basis"]["coef"]), sn.get("level")), []).append(i)
    for (family, k, signed_level), at in groups.items():
        group = [snaps[i] for i in at]

        def column(get, default=np.nan):
            return np.array([default if get(sn) is None else get(sn) for sn in group], dtype=float)
        nan_cov = [[np.nan] * k] * k
        values = evaluate(
            BY_NAME[family], np.array([sn["basis"]["coef"] for sn in group], dtype=float),
            column(lambda sn: sn["basis"]["mid"]), column(lambda sn: sn["basis"]["half"]),
            column(lambda sn: sn.get("smearing")),
            np.array([interval_cov(sn) or nan_cov for sn in group], dtype=float),
            column(lambda sn: sn.get("sigma2")), column(lambda sn: sn.get("df"), 1).astype(np.int64),
            np.asarray(prices, dtype=float)[at], level if signed_level is None else signed_level)
        for j, i in enumerate(at):
            out[i] = {name: (float(v[j]) if math.isfinite(v[j]) else None)
                      for name, v in zip(("volume", "lo", "hi", "elasticity"), values)}
    return out


def signed_curve(snapshot: dict, price) -> np.ndarray:
    """Volume of a signed curve at ``price`` (its basis and smearing, as recorded)."""
    family, basis = BY_NAME[snapshot["family"]], snapshot["basis"]
    smear = snapshot["smearing"] if snapshot.get("smearing") is not None else np.nan
    return family.curve(np.asarray(basis["coef"], dtype=float), basis["mid"], basis["half"], smear,
                        np.asarray(price, dtype=float))


def snapshots(name: str, family: str, level: float, *, coef, mid, half, smear, cov, sigma2, df, n, lo, hi,
              last_date, plan_price, cv_mse, controls: list[str] | None = None, cov_known: bool = True,
              fitted: dict | None = None) -> list[dict]:
    """The ``signed`` objects of n series for candidate ``name`` of ``family``: arrays (n,) and
    ``coef`` (n, k), ``cov`` (n, k, k); ``last_date`` a list of "YYYY-MM-DD" or None; ``cov_known``
    False: ``cov`` is not to be used (results with controls written before it was at the plan's values);
    ``fitted``: ``fit_terms`` of the fit (its weighting and CV settings), recorded in every snapshot."""
    fam = BY_NAME[family]
    coef = np.asarray(coef, dtype=float).reshape(len(mid), -1)
    k = coef.shape[1]
    cov = np.asarray(cov, dtype=float).reshape(len(mid), k, k) if cov_known else np.full((len(mid), k, k), np.nan)
    sigma2, df = np.asarray(sigma2, dtype=float), np.asarray(df, dtype=float)
    complete = np.isfinite(cov).all(axis=(1, 2)) & np.isfinite(sigma2) & np.isfinite(df)
    plain = fam.plain(coef, mid, half)
    plan_price = np.asarray(plan_price, dtype=float)
    planned = np.isfinite(plan_price)
    volume, p_lo, p_hi, elasticity = (np.full(len(mid), np.nan) for _ in range(4))
    if planned.any():
        at = np.flatnonzero(planned)
        values = evaluate(fam, coef[at], mid[at], half[at], smear[at], cov[at], sigma2[at],
                          np.where(np.isfinite(df[at]), df[at], 1).astype(np.int64), plan_price[at], level)
        for column, value in zip((volume, p_lo, p_hi, elasticity), values):
            column[at] = value
    whole_list = complete.tolist()
    smears = _nums(smear) if fam.smeared else [None] * len(mid)
    planned_list = planned.tolist()
    out = []
    columns = zip(_rows(plain, np.isfinite(plain).all(axis=1)), _rows(coef, np.isfinite(coef).all(axis=1)),
                  _nums(mid), _nums(half), smears, _rows(cov, complete),
                  _nums(np.where(complete, sigma2, np.nan)), np.where(complete, df, 0).astype(np.int64).tolist(),
                  np.asarray(n).astype(np.int64).tolist(), _nums(lo), _nums(hi), last_date,
                  plan_price.tolist(), _nums(volume), _nums(p_lo), _nums(p_hi), _nums(elasticity),
                  _nums(cv_mse), whole_list, planned_list)
    for (pc, bc, m, h, sm, cv, s2, d, count, low, high, last, pp, vol, plo, phi, el, mse, whole, has_plan) in columns:
        snapshot = {
            "candidate": name, "family": family, "coef": pc, "smearing": sm,
            "basis": {"x": fam.regressor, "mid": m, "half": h, "coef": bc},
            "cov_unscaled": cv if whole else None,
            "sigma2": s2, "df": d if whole else None, "level": level,
            "n": count, "price_range": [low, high], "last_date": last,
            "plan": {"price": pp, "volume": vol, "lo": plo, "hi": phi, "elasticity": el} if has_plan else None,
            "cv_mse": mse, "controls": controls, **(fitted or {})}
        if controls and whole:
            snapshot["cov_at_plan_controls"] = True
        if not whole:
            snapshot["incomplete"] = INCOMPLETE
        out.append(snapshot)
    return out


def date_texts(days: np.ndarray | None, n: int) -> list:
    """"YYYY-MM-DD" (None for NaT) of n datetime64[D] values, or n Nones without dates."""
    if days is None:
        return [None] * n
    text = np.datetime_as_string(days, unit="D")
    return [None if np.isnat(d) else t for d, t in zip(days, text.tolist())]


def from_results(results: Results, series, c: int, cov: np.ndarray | None = None) -> list[dict]:
    """The snapshots of candidate ``c`` on ``series`` (indices) of ``results`` (a fit, or results read
    back: their stored interval parts, or none)."""
    series = np.asarray(series, dtype=np.int64)
    cand = results.candidates[c]
    k = cand.complexity
    if cov is None:
        stored = getattr(results, "stored_cov", None)
        cov = stored.of(series, c) if stored is not None else covariances(results, series)[:, c, :k, :k]

    def cell(a):  # stored results hold cells as columns read on demand: one series, or all at once
        if isinstance(a, np.ndarray):
            return a[series, c]
        return np.array([a[s, c] for s in series.tolist()]) if len(series) < 8 else np.asarray(a)[series, c]
    coef = cell(results.coef)[:, :k]
    dates = last_dates(results)
    return snapshots(cand.name, cand.family, results.settings.level, coef=coef, mid=results.basis_mid[series, c],
                     half=results.basis_half[series, c], smear=results.smear[series, c], cov=cov,
                     sigma2=cell(results.sigma2), df=cell(results.df), n=results.data.counts[series],
                     lo=results.price_lo[series], hi=results.price_hi[series],
                     last_date=date_texts(None if dates is None else dates[series], len(series)),
                     plan_price=results.plan_price[series], cv_mse=cell(results.cv_mse),
                     controls=terms(results), fitted=fit_terms_of(results))


def terms(results: Results) -> list[str] | None:
    """The control terms a fit held fixed (columns, then season terms), None without: a signed model
    records them, so a later fit with other controls is not taken for the same model."""
    ctl = getattr(results, "controls", None)
    return list(ctl.names) if ctl is not None and len(ctl.names) else None


CV_SETTINGS = ("folds", "fold_order", "seed", "rule")  # what chose the shape: a carry under other ones says so


def fit_terms(settings: dict) -> dict:
    """What a signed snapshot records of a fit beyond its curve, from its settings (a results header's, or
    ``FitSettings.as_dict()``): ``weight``, the weight column (None: unweighted), and ``cv``, the settings
    that chose the shape."""
    return {"weight": (settings.get("columns") or {}).get("weight"),
            "cv": {name: settings.get(name) for name in CV_SETTINGS}}


def fit_terms_of(results: Results) -> dict:
    """``fit_terms`` of a fit: from the settings it records, so a fit and its results read back record the same
    (a Python-API fit that names no columns records none: unweighted)."""
    return fit_terms(results.settings.as_dict())


def header_terms(settings: dict) -> list[str] | None:
    """``terms`` from a results header's settings."""
    return list((settings.get("controls") or {}).get("terms") or []) or None


def from_records(pairs: list[tuple[dict, str]], level: float, controls: list[str] | None = None,
                 cov_known: bool = True, fitted: dict | None = None) -> list[dict]:
    """Snapshots of candidate ``name`` of each results ``record`` (the JSON layout, as ``read_results``
    gives it), in order; each candidate's ``basis``, ``cov_unscaled``, ``sigma2`` and ``df`` as the
    results hold them (missing, or not ``cov_known``: an incomplete snapshot)."""
    out: list[dict | None] = [None] * len(pairs)
    groups: dict[str, list[int]] = {}
    for i, (record, name) in enumerate(pairs):
        groups.setdefault(name, []).append(i)
    for name, members in groups.items():
        cands = [next(c for c in pairs[i][0]["candidates"] if c["name"] == name) for i in members]
        records = [pairs[i][0] for i in members]
        k = len(cands[0]["basis"]["coef"])
        nan_cov = [[math.nan] * k] * k
        made = snapshots(
            name, cands[0]["family"], level,
            coef=np.array([c["basis"]["coef"] for c in cands], dtype=float),
            mid=np.array([c["basis"]["mid"] for c in cands], dtype=float),
            half=np.array([c["basis"]["half"] for c in cands], dtype=float),
            smear=np.array([c.get("smearing") for c in cands], dtype=float),
            cov=np.array([c.get("cov_unscaled") or nan_cov for c in cands], dtype=float),
            sigma2=np.array([c.get("sigma2") for c in cands], dtype=float),
            df=np.array([c.get("df") for c in cands], dtype=float),
            n=np.array([r["n"] for r in records]), lo=np.array([r["price_range"][0] for r in records], dtype=float),
            hi=np.array([r["price_range"][1] for r in records], dtype=float),
            last_date=[r.get("last_date") for r in records],
            plan_price=np.array([(r.get("plan") or {}).get("price") for r in records], dtype=float),
            cv_mse=np.array([c["cv_mse"] for c in cands], dtype=float), controls=controls, cov_known=cov_known,
            fitted=fitted)
        for i, snapshot in zip(members, made):
            out[i] = snapshot
    return out
