"""Helpers for the checks of fits with controls: invented series (inputs to comparisons only), the design
of a candidate with its controls, and brute-force refits of every fold with numpy."""
from __future__ import annotations

import numpy as np

import fitcore
from fitcore.fit.controls import season_terms


def controlled_data(seed: int, n_series: int = 30, weighted: bool = False, awkward: bool = True,
                    n_range=(14, 50)) -> fitcore.Dataset:
    """Series with a 0/1 promotion flag (price cut, and volume lifted beyond the cut), a competitor's price
    and weekly dates.  ``awkward``: series 0's promotion is on one row only (a lone row), series 1's is
    constant (1 throughout), series 2's competitor price is constant."""
    rng = np.random.default_rng(seed)
    counts = rng.integers(*n_range, n_series)
    total = int(counts.sum())
    offsets = np.concatenate(([0], np.cumsum(counts)))
    base = np.repeat(rng.uniform(1, 30, n_series), counts)
    promo = (rng.random(total) < 0.25).astype(float)
    if awkward:
        promo[offsets[0]:offsets[1]] = 0.0
        promo[offsets[0] + 4] = 1.0
        promo[offsets[1]:offsets[2]] = 1.0
    price = np.round(base * rng.uniform(0.8, 1.2, total) * np.where(promo > 0, 0.85, 1.0), 2)
    rival = np.round(base * rng.uniform(0.7, 1.3, total), 2)
    if awkward:
        rival[offsets[2]:offsets[3]] = 5.0
    week = np.concatenate([rng.permutation(c) for c in counts]) * 7 + np.repeat(rng.integers(0, 300, n_series), counts)
    date = np.datetime64("2023-01-02") + week.astype("timedelta64[D]")
    season = np.sin(2 * np.pi * (date - np.datetime64("2023-01-01")).astype(int) / 365.25)
    volume = (np.repeat(rng.uniform(80, 3000, n_series), counts) * (price / base) ** np.repeat(rng.uniform(-3, -0.5,
              n_series), counts) * np.exp(0.4 * promo + 0.3 * (rival / base - 1) + 0.2 * season)
              * rng.lognormal(0, 0.1, total))
    keys = {"product": np.repeat(np.array([f"item {i:03d}" for i in range(n_series)], dtype=object), counts)}
    return fitcore.from_columns(keys, price, volume, weight=rng.uniform(0.3, 3, total) if weighted else None,
                                date=date, controls={"promo": promo, "rival": rival})


def control_rows(data: fitcore.Dataset, s: int, season: int) -> np.ndarray:
    """(n, M) series ``s``'s control terms in the engine's order: the columns, then the season terms."""
    rows = slice(data.offsets[s], data.offsets[s + 1])
    columns = [data.controls[name][rows] for name in data.controls]
    if season:
        columns.extend(season_terms(data.date[rows], season))
    return np.column_stack(columns) if columns else np.zeros((rows.stop - rows.start, 0))


def price_terms(price: np.ndarray, family: str, degree: int | None) -> np.ndarray:
    """(n, k) a candidate's price columns after the intercept: powers of price, ln price, or price."""
    if family == "poly":
        return np.column_stack([price ** k for k in range(1, degree + 1)]) if degree else np.zeros((len(price), 0))
    return np.log(price)[:, None] if family == "loglog" else price[:, None]


def kept_columns(controls: np.ndarray, w: np.ndarray, tol: float = 1e-6) -> list[int]:
    """The controls a fit on these rows keeps, in order: each that is not constant there and not (to R² above
    1 − ``tol``) a combination of the intercept and the controls kept before it."""
    kept: list[int] = []
    sw = np.sqrt(w)
    for j in range(controls.shape[1]):
        z = controls[:, j]
        if np.ptp(z) == 0:
            continue
        basis = np.column_stack([np.ones(len(z)), controls[:, kept]]) * sw[:, None]
        coef = np.linalg.lstsq(basis, z * sw, rcond=None)[0]
        left = np.sum((z * sw - basis @ coef) ** 2)
        centred = np.sum(w * (z - np.average(z, weights=w)) ** 2)
        if left > tol * centred:
            kept.append(j)
    return kept


def wls(design: np.ndarray, y: np.ndarray, w: np.ndarray) -> np.ndarray:
    sw = np.sqrt(w)
    return np.linalg.lstsq(design * sw[:, None], y * sw, rcond=None)[0]


def refit_held_out(price, volume, w, controls, splits, family: str, degree: int | None, loo: bool = False):
    """Each fold's weighted held-out volume MSE (each row's squared error for ``loo``) by refitting the
    candidate with its controls on the fold's training rows (numpy ``lstsq``); controls the training rows
    hold constant (or redundant there) are left out of that fold's fit, so held-out rows get no effect from
    them.  Log families: exp(prediction) × Duan's smearing factor of the training rows' residuals under
    that refit (for ``loo`` too: the README's definition)."""
    logged = family != "poly"
    target = np.log(volume) if logged else volume
    terms = price_terms(price, family, degree)
    out = []
    for train, test in splits:
        keep = kept_columns(controls[train], w[train])
        design = np.column_stack([np.ones(len(price)), controls[:, keep], terms])
        coef = wls(design[train], target[train], w[train])
        predicted = design[test] @ coef
        if logged:
            residual = target[train] - design[train] @ coef
            predicted = np.exp(predicted) * np.average(np.exp(residual), weights=w[train])
        errors = (volume[test] - predicted) ** 2
        out.append(errors[0] if loo else np.sum(w[test] * errors) / np.sum(w[test]))
    return np.array(out)


def weekly(first: str, weeks: int, seed: int = 3):
    """One series of ``weeks`` weekly rows from ``first``: a falling line in price with noise."""
    rng = np.random.default_rng(seed)
    date = np.datetime64(first) + 7 * np.arange(weeks).astype("timedelta64[D]")
    price = np.round(rng.uniform(2, 4, weeks), 2)
    volume = 500 - 60 * price + rng.normal(0, 5, weeks)
    return fitcore.from_columns({"product": np.array(["sprocket"] * weeks, dtype=object)}, price, volume, date=date)
