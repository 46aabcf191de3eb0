"""Thresholds of the diagnostic flags: one frozen, validated object."""
from __future__ import annotations

import math
from dataclasses import asdict, dataclass, fields

from ..errors import DataError, SettingsError


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
    - ``season_days``: with ``--season``, a plan date more than this many days from the time of year of
      every row of a series → ``outside-range`` (half a month: rows a week or a month apart round the
      year never trip it; a series seen from January to May planned for August always does).
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
    season_days: int = 15

    def __post_init__(self) -> None:
        for name, (ok, expected) in RANGES.items():
            value = getattr(self, name)
            finite = isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)
            if not (finite and ok(value)):  # finite: a results file and the ledger's records are strict JSON
                words = expected if finite or expected.startswith("a ") else f"a finite number {expected}"
                raise SettingsError(f"threshold {name} is out of range: expected {words}, got {value!r}")

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


def recorded_thresholds(values, path) -> Thresholds:
    """The thresholds a results file records (``settings`` → ``thresholds``), or ``DataError`` naming the file
    when they are not thresholds pricefold accepts (one written before every threshold had to be finite)."""
    if values is None:
        return Thresholds()
    if not isinstance(values, dict):
        raise DataError(f"expected 'settings' → 'thresholds' to be a table of thresholds, found {values!r}",
                        path=str(path))
    unknown = sorted(set(values) - set(Thresholds.names()))
    if unknown:
        raise DataError(f"records an unknown threshold {unknown[0]!r}; expected one of "
                        f"{', '.join(Thresholds.names())}", path=str(path))
    try:
        return Thresholds(**values)
    except SettingsError as exc:
        raise DataError(f"its recorded {exc}; fit the data again with thresholds in range", path=str(path)) from None


def parse_threshold_options(items: list[str]) -> dict[str, str]:
    """``["min_points=10", …]`` → ``{"min_points": "10", …}``."""
    out = {}
    for item in items:
        name, sep, value = item.partition("=")
        if not sep or not name.strip() or not value.strip():
            raise SettingsError(f"expected --threshold NAME=VALUE, got {item!r}")
        out[name.strip()] = value.strip()
    return out


# name → (the check, what it expects in words): the one place a threshold's range is written
RANGES = {
    "min_points": (lambda v: v >= 1, "a whole number of at least 1"),
    "min_distinct_prices": (lambda v: v >= 1, "a whole number of at least 1"),
    "min_price_cv": (lambda v: v >= 0, "at least 0"),
    "rising_share": (lambda v: 0 <= v < 1, "from 0 up to (not including) 1"),
    "near_tie_change": (lambda v: v > 0, "above 0"),
    "unsteady_ratio": (lambda v: v > 1, "above 1"),
    "weak_score": (lambda v: v <= 1, "at most 1"),
    "cook_floor": (lambda v: v > 0, "above 0"),
    "price_tied_vif": (lambda v: v > 1, "above 1"),
    "plan_gap": (lambda v: 0 < v < 1, "between 0 and 1 (both excluded)"),
    "shift_error_ratio": (lambda v: v > 0, "above 0"),
    "shift_coverage": (lambda v: 0 <= v <= 1, "from 0 to 1"),
    "shift_min_rows": (lambda v: v >= 1, "a whole number of at least 1"),
    "shift_volume": (lambda v: v > 0, "above 0"),
    "season_days": (lambda v: 1 <= v <= 182, "a whole number of days from 1 to 182"),
}
