"""The ``price-tied`` sentence, word for word, for a control moving exactly and nearly with price.

Invented data.  The variance inflation the near case quotes is checked against statsmodels'
``variance_inflation_factor`` (price's column in [1, price, control]).
"""
from __future__ import annotations

import numpy as np
from statsmodels.stats.outliers_influence import variance_inflation_factor

import fitcore
from fitcore.review.flags import diagnose


def tied_sentence(control: np.ndarray, price: np.ndarray, volume: np.ndarray) -> tuple[str, float]:
    data = fitcore.from_columns({"product": np.array(["a"] * len(price), dtype=object)}, price, volume,
                                controls={"coll": control})
    results = fitcore.fit_batch(data, plan_price=2.5)
    message = next(f["message"] for f in diagnose(results).flags_of(0) if f["code"] == "price-tied")
    return message, float(results.controls.vif[0])


def test_a_control_moving_exactly_with_price_reads_as_one_sentence():
    rng = np.random.default_rng(1)
    price = np.linspace(2, 3, 24)
    message, _ = tied_sentence(2 * price + 1, price, 900 - 200 * price + rng.normal(0, 5, 24))
    # no price term is left to choose (a curve in ln price too: told from coll only by its curvature), so the flat
    # poly0 is chosen and coll's term takes the price effect: −200 a unit of price is −100 a unit of
    # coll = 2·price + 1
    assert message == ("Price moved exactly with coll, so the price effect cannot be told apart from coll's: "
                       "the chosen curve (poly0) is flat, so its elasticity 0 is the model's choice, not a "
                       "measurement; the price effect may sit in coll's fitted term (coll: −100.1 units per "
                       "1.00 more with the fitted curve).")


def test_a_control_moving_nearly_with_price_quotes_its_variance_inflation():
    rng = np.random.default_rng(1)
    price = np.linspace(2, 3, 24)
    volume = 900 - 200 * price + rng.normal(0, 5, 24)
    control = 2 * price + 1 + rng.normal(0, 0.05, 24)
    message, vif = tied_sentence(control, price, volume)
    reference = variance_inflation_factor(np.column_stack([np.ones(24), price, control]), 1)  # statsmodels
    assert abs(vif - reference) < 1e-6 * reference
    assert message == (f"Price moved so closely with coll (variance inflation of price {reference:.1f}, above 10) "
                       f"that the price effect cannot be told apart from coll's: the curve's slope may belong to "
                       f"either.")
