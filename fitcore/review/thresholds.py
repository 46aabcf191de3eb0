"""Thresholds of the diagnostic flags: one frozen, validated object."""
from __future__ import annotations

from dataclasses import asdict, dataclass, fields

from ..errors import SettingsError


@dataclass(frozen=True)
class Thresholds:
    """When a series is flagged for a human (see ``diagnostics.FLAGS``).

    - ``min_points``: fewer observations than this → ``few-points``.
    - ``min_distinct_prices``, ``min_price_cv``: fewer distinct prices, or a
      price coefficient of variation below this → ``flat-price``.
    - ``rising_share``: the chosen curve rises over more than this share of the
      observed price range → ``rising``.
    - ``near_tie_change``: a candidate within one SE predicts a volume differing
      by more than this share → ``near-tie``.
    - ``unsteady_ratio``: largest fold MSE over the median fold MSE above this
      → ``unsteady-folds``.
    - ``weak_score``: Q² below this → ``weak-fit``.
    - ``cook_floor``: Cook's distance above max(4/n, this) → ``influential-point``
      (4/n and a floor near 0.5 are common rules of thumb, not a test).
    - ``plan_gap``: a plan price inside the observed range whose nearest observed price is farther than this
      share of the range → ``price-gap`` (a common-practice caution, not a test: the curve there rests on its
      shape, not on observations near it).
    - ``price_tied_vif``: with controls, the variance inflation of price given them above this
      → ``price-tied`` (10 is a common rule of thumb for collinearity, not a test).
    - ``shift_error_ratio``, ``shift_coverage``, ``shift_min_rows``, ``shift_volume``: a signed curve
      whose RMSE on the rows since sign-off is above this multiple of its CV RMSE, or whose 95% band
      holds less than this share of them (judged from ``shift_min_rows`` new rows on), or whose
      volume at the plan price differs from this cycle's proposal by more than this share → ``shifted``
      (needs the ledger: ``fit --ledger``).  ``shift_error_ratio`` also judges the signed curve on its own
      rows where they were restated since: beyond it, ``history-changed`` (``fitcore.ledger.backtest``).
    """

    min_points: int = 12
    min_distinct_prices: int = 3
    min_price_cv: float = 0.02
    rising_share: float = 0.10
    near_tie_change: float = 0.10
    unsteady_ratio: float = 5.0
    weak_score: float = 0.3
    cook_floor: float = 0.5
    price_tied_vif: float = 10.0
    plan_gap: float = 0.10
    shift_error_ratio: float = 2.0
    shift_coverage: float = 0.75
    shift_min_rows: int = 4
    shift_volume: float = 0.15

    def __post_init__(self) -> None:
        checks = {
            "min_points": self.min_points >= 1, "min_distinct_prices": self.min_distinct_prices >= 1,
            "min_price_cv": self.min_price_cv >= 0, "rising_share": 0 <= self.rising_share < 1,
            "near_tie_change": self.near_tie_change > 0, "unsteady_ratio": self.unsteady_ratio > 1,
            "weak_score": self.weak_score <= 1, "cook_floor": self.cook_floor > 0,
            "price_tied_vif": self.price_tied_vif > 1, "plan_gap": 0 < self.plan_gap < 1,
            "shift_error_ratio": self.shift_error_ratio > 0, "shift_coverage": 0 <= self.shift_coverage <= 1,
            "shift_min_rows": self.shift_min_rows >= 1, "shift_volume": self.shift_volume > 0,
        }
        for name, ok in checks.items():
            if not ok:
                raise SettingsError(f"threshold {name} is out of range: got {getattr(self, name)}")

    def as_dict(self) -> dict:
        return asdict(self)

    @classmethod
    def names(cls) -> list[str]:
        return [f.name for f in fields(cls)]

    def with_overrides(self, pairs: dict[str, str | float]) -> "Thresholds":
        """A copy with ``name → value`` overrides (values may be text from a command line)."""
        values = self.as_dict()
        for name, raw in pairs.items():
            if name not in values:
                raise SettingsError(f"unknown threshold {name!r}; expected one of {', '.join(self.names())}")
            kind = type(values[name])
            try:
                values[name] = kind(raw) if kind is float else int(str(raw))
            except ValueError:
                raise SettingsError(f"expected a {'whole ' if kind is int else ''}number for threshold {name}, "
                                    f"got {raw!r}") from None
        return Thresholds(**values)


def parse_threshold_options(items: list[str]) -> dict[str, str]:
    """``["min_points=10", …]`` → ``{"min_points": "10", …}``."""
    out = {}
    for item in items:
        name, sep, value = item.partition("=")
        if not sep or not name.strip() or not value.strip():
            raise SettingsError(f"expected --threshold NAME=VALUE, got {item!r}")
        out[name.strip()] = value.strip()
    return out
