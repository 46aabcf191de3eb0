"""The shifted sentence beside a flat curve (poly0): no "its elasticity differs by −3.81" — a flat curve's
elasticity of 0 is the model's choice, not a measurement, as everywhere else it is said (a trial)."""
from __future__ import annotations

from fitcore.review.sentences import shift_sentence


def _backtest(candidate: str) -> dict:
    return {"status": "passed", "candidate": candidate, "signed_at": "2026-12-01", "analyst": "ana", "price": 2.3,
            "planned": True, "signed_volume": 540.0, "signed_lo": 500.0, "signed_hi": 580.0, "signed_price": 2.3,
            "new_rows": 4, "error_ratio": 1.1, "outside": 0, "proposed_volume": 520.0, "volume_change": -0.037,
            "elasticity_change": -3.81, "shape_changed": True}


def test_no_elasticity_change_is_said_beside_a_flat_curve():
    assert "its elasticity differs by −3.81" in shift_sentence(_backtest("poly1"), "poly2")
    for signed, proposal in (("poly0", "poly2"), ("poly1", "poly0")):
        said = shift_sentence(_backtest(signed), proposal)
        assert "elasticity" not in said and "(−4% on the signed curve)" in said, said
