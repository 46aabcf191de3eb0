"""A candidate whose held-out error overflows is unavailable with a reason, never "available" with no score.

A price of 1e-300 among prices near 2 (a mistyped or missing price): the fold that holds it out fits a
log-log curve on the other rows and evaluates it at ln(1e-300) ≈ −691, far beyond floating point once
exponentiated.  That is checked independently with numpy's least squares (``numpy.linalg.lstsq``) on
the same rows; the engine must then mark the log-log candidate unavailable with a sentence, keep the
polynomials' scores, and `show` must print the series (it raised a TypeError on the missing score).
"""
from __future__ import annotations

import subprocess
import sys

import numpy as np

import fitcore
from fitcore.fit import reasons

PRICE = np.array([2.40, 2.05, 2.55, 1.95, 2.10, 2.20, 2.70, 2.30, 1e-300, 2.60, 2.45, 2.35, 2.50, 2.65, 2.25,
                  2.15, 2.00, 2.75, 1.90, 2.85, 2.80, 2.12, 2.38, 2.62])
# volumes of an invented elasticity of −2.5 (rounded, one noise factor per row); the tiny price's row ordinary
NOISE = np.array([1.02, 0.97, 1.01, 0.99, 1.03, 0.98, 1.00, 1.02, 1.00, 0.97, 1.01, 0.99, 1.04, 0.96, 1.00,
                  1.02, 0.98, 1.01, 0.99, 1.03, 0.97, 1.00, 1.02, 0.98])
VOLUME = np.round(4000 * np.where(PRICE > 1e-100, PRICE, 2.3) ** -2.5 * NOISE)


def test_a_held_out_overflow_is_independent_fact():
    """numpy: the log-log fit without the tiny price, evaluated there, overflows to inf."""
    keep = PRICE > 1e-100
    design = np.column_stack([np.ones(keep.sum()), np.log(PRICE[keep])])
    coef = np.linalg.lstsq(design, np.log(VOLUME[keep]), rcond=None)[0]
    with np.errstate(over="ignore"):
        assert np.isinf(np.exp(coef[0] + coef[1] * np.log(1e-300)))


def test_the_log_log_candidate_is_unavailable_with_its_reason():
    data = fitcore.from_columns({"product": np.array(["a"] * len(PRICE), dtype=object)}, PRICE, VOLUME)
    results = fitcore.fit_batch(data)
    c = results.names.index("loglog")
    assert not results.available[0, c]
    assert results.reason[0, c] == reasons.HELD_OUT_OVERFLOW
    assert "overflow" in results.reason_text(0, c)
    # every candidate left available has a finite score, so a rule can compare them
    assert np.isfinite(results.cv_mse[0][results.available[0]]).all()


def test_show_prints_such_a_series(tmp_path):
    data = tmp_path / "d.csv"
    data.write_text("product,price,volume\n" + "".join(f"a,{float(p)!r},{float(v)!r}\n" for p, v in zip(PRICE, VOLUME)))
    out = tmp_path / "r.json"
    subprocess.run([sys.executable, "-m", "pricefold", "fit", str(data), "-o", str(out), "-q"], check=True)
    shown = subprocess.run([sys.executable, "-m", "pricefold", "show", str(out)], capture_output=True, text=True)
    assert shown.returncode == 0, shown.stderr
    assert "loglog     unavailable: its held-out errors overflow" in shown.stdout
