"""NIST StRD Wampler1 and Wampler2 through the ``pricefold fit`` command."""
from __future__ import annotations

import csv
import json

import numpy as np
import pytest

from pricefold.cli import main
from tests.reference.nist_strd import (
    MIN_LRE,
    WAMPLER1_CERTIFIED,
    WAMPLER1_Y,
    WAMPLER2_CERTIFIED,
    WAMPLER2_Y,
    X,
)


def log_relative_error(estimate, certified):
    estimate, certified = np.asarray(estimate), np.asarray(certified)
    error = np.abs(estimate - certified) / np.abs(certified)
    return -np.log10(np.maximum(error, 1e-17))


def fit_poly5(tmp_path, y):
    data = tmp_path / "strd.csv"
    with open(data, "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["product", "price", "volume"])
        writer.writerows(("strd", x, repr(v)) for x, v in zip(X, y))
    out = tmp_path / "strd.json"
    assert main(["fit", str(data), "-o", str(out), "--degrees", "5", "--no-loglog", "--folds", "3", "--quiet"]) == 0
    series = json.loads(out.read_text())["series"][0]
    return series["candidates"][0]


@pytest.mark.parametrize("name, y, certified", [
    ("Wampler1", WAMPLER1_Y, WAMPLER1_CERTIFIED),
    ("Wampler2", WAMPLER2_Y, WAMPLER2_CERTIFIED),
])
def test_certified_coefficients(tmp_path, name, y, certified):
    candidate = fit_poly5(tmp_path, y)
    assert candidate["name"] == "poly5" and candidate["available"]
    lre = log_relative_error(candidate["coef"], certified)
    assert lre.min() >= MIN_LRE[name], f"{name}: correct digits per coefficient {np.round(lre, 1)}"
    # Certified residual standard deviation is 0 and R² is 1 for both datasets.
    assert candidate["r2"] == pytest.approx(1.0, abs=1e-12)


@pytest.mark.parametrize("y, certified", [(WAMPLER1_Y, WAMPLER1_CERTIFIED), (WAMPLER2_Y, WAMPLER2_CERTIFIED)])
def test_naive_normal_equations_do_worse(tmp_path, y, certified):
    """The textbook route (raw powers, XᵀX solved directly) loses digits the engine keeps."""
    x = np.array(X, dtype=float)
    vander = np.vander(x, 6, increasing=True)
    naive = np.linalg.solve(vander.T @ vander, vander.T @ np.array(y, dtype=float))
    ours = fit_poly5(tmp_path, y)["coef"]
    assert log_relative_error(ours, certified).min() > log_relative_error(naive, certified).min() + 1
