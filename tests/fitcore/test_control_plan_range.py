"""A plan value of a control outside the values its series has seen raises ``outside-range`` and says so.

Invented data: three series with straight-line demand, a 0/1 ``promo`` and a competitor price ``comp``
between 1 and 3.  The observed range each sentence quotes is computed here with Python's ``min`` and
``max`` over the generated rows, apart from the engine.
"""
from __future__ import annotations

import numpy as np

import fitcore
from fitcore.review.flags import diagnose
from fitcore.review.formats import fmt


def test_plan_controls_outside_each_series_range_raise_outside_range_with_the_numbers():
    rng = np.random.default_rng(4)
    n = 30
    price = np.tile(np.linspace(2.0, 3.0, n), 3)
    promo = np.tile((np.arange(n) % 4 == 0).astype(float), 3)
    comp = np.round(rng.uniform(1, 3, 3 * n), 2)
    volume = 900 - 200 * price + 80 * promo + 30 * comp + rng.normal(0, 10, 3 * n)
    keys = {"product": np.repeat(np.array(["far comp", "fine", "big promo"], dtype=object), n)}
    data = fitcore.from_columns(keys, price, volume, controls={"promo": promo, "comp": comp})
    plan = {"promo": np.array([0.0, 1.0, 5.0]), "comp": np.array([100.0, 2.0, 2.0])}
    results = fitcore.fit_batch(data, plan_price=2.5, plan_controls=plan)
    diagnosis = diagnose(results)
    names = list(results.data.keys["product"])
    far, fine, big = (names.index(x) for x in ("far comp", "fine", "big promo"))
    assert diagnosis.flagged("outside-range")[[far, fine, big]].tolist() == [True, False, True]
    comp_seen = comp[names.index("far comp") * n:(names.index("far comp") + 1) * n]
    lo, hi = min(comp_seen.tolist()), max(comp_seen.tolist())
    message = next(f["message"] for f in diagnosis.flags_of(far) if f["code"] == "outside-range")
    assert message == (f"The plan's comp = 100 lies outside the comp values this series has seen "
                       f"({fmt(lo)} to {fmt(hi)}); the prediction there is an extrapolation.")
    message = next(f["message"] for f in diagnosis.flags_of(big) if f["code"] == "outside-range")
    assert message == ("The plan's promo = 5 lies outside the promo values this series has seen (0 to 1); "
                       "the prediction there is an extrapolation.")


def one_series(seed: int) -> fitcore.Dataset:
    """24 rows of straight-line demand, prices 2-3, a competitor price ``comp`` between 1 and 3."""
    rng = np.random.default_rng(seed)
    price = np.linspace(2.0, 3.0, 24)
    comp = np.round(rng.uniform(1, 3, 24), 2)
    volume = 900 - 200 * price + 30 * comp + rng.normal(0, 10, 24)
    return fitcore.from_columns({"product": np.array(["a"] * 24, dtype=object)}, price, volume,
                                controls={"comp": comp})


def test_a_plan_price_and_a_control_outside_are_both_named():
    results = fitcore.fit_batch(one_series(5), plan_price=4.0, plan_controls={"comp": np.array([0.5])})
    message = next(f["message"] for f in diagnose(results).flags_of(0) if f["code"] == "outside-range")
    assert message.startswith("Plan price 4.00 is 1.00 (100% of the observed range) above the highest price "
                              "observed (3.00); the plan's comp = 0.5 lies outside the comp values")


def test_the_override_dialogs_checks_agree_with_the_series_flag():
    """Every candidate held at a control value outside the data extrapolates (``candidate_checks``)."""
    from fitcore.review.candidate_checks import candidate_checks
    data = one_series(6)
    for plan, outside in ((100.0, True), (2.0, False)):
        results = fitcore.fit_batch(data, plan_price=2.5, plan_controls={"comp": np.array([plan])})
        assert bool(diagnose(results).flagged("outside-range")[0]) is outside
        for c in np.flatnonzero(results.available[0]):
            assert ("outside-range" in candidate_checks(results, 0, int(c)).codes) is outside


def test_the_ranges_of_some_series_are_those_python_finds_and_the_diagnosis_keeps_the_answer():
    """``control_ranges`` of a few series (one candidate's checks) against Python's ``min``/``max`` over the
    generated rows; ``Diagnosis.controls_outside`` gives diagnose's answer, the same for every candidate."""
    from fitcore.review.candidate_checks import candidate_checks
    from fitcore.review.flags import control_ranges
    rng = np.random.default_rng(7)
    n, products = 20, ["p0", "p1", "p2", "p3"]
    price = np.tile(np.linspace(2.0, 3.0, n), 4)
    comp = np.round(rng.uniform(1, 3, 4 * n), 2)
    volume = 900 - 200 * price + 30 * comp + rng.normal(0, 10, 4 * n)
    data = fitcore.from_columns({"product": np.repeat(np.array(products, dtype=object), n)}, price, volume,
                                controls={"comp": comp})
    plan = np.array([2.0, 50.0, 2.0, 0.1])
    results = fitcore.fit_batch(data, plan_price=2.5, plan_controls={"comp": plan})
    names = list(results.data.keys["product"])
    seen = {name: comp[i * n:(i + 1) * n].tolist() for i, name in enumerate(products)}
    planned = dict(zip(products, plan.tolist()))
    picked = np.array([names.index("p3"), names.index("p1")])
    lo, hi, outside = control_ranges(results, picked)
    for row, s in enumerate(picked):
        values = seen[names[s]]
        assert (lo[row, 0], hi[row, 0]) == (min(values), max(values))
        assert bool(outside[row, 0]) is not (min(values) <= planned[names[s]] <= max(values))
    diagnosis = diagnose(results)
    for s in range(4):
        values = seen[names[s]]
        assert diagnosis.controls_outside(s) is not (min(values) <= planned[names[s]] <= max(values))
        for c in np.flatnonzero(results.available[s]):
            assert candidate_checks(results, s, int(c)) == candidate_checks(
                results, s, int(c), diagnosis.thresholds, diagnosis.controls_outside(s))
