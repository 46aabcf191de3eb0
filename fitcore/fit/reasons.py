"""Why a candidate is unavailable for a series: codes kept as int8, sentences made on output."""
from __future__ import annotations

import numpy as np

NONE = 0
TOO_FEW_FOR_FOLDS = 1
FLAT_PRICE = 2
TOO_FEW_POINTS = 3
RANK_ALL = 4
RANK_FOLD = 5
LEVERAGE_ONE = 6
NOT_SERVED = 7  # the family cannot fit the series (e.g. a log of a price or volume ≤ 0)
NO_WEIGHT = 8  # every observation of the series weighs zero
WEIGHT_OVERFLOW = 9  # the series' weighted sums overflow
CONTROL_TIED = 10  # a price term cannot be told apart from the controls
HELD_OUT_OVERFLOW = 11  # a held-out error beyond floating point (a price or volume far from the rest)

# Above this variance inflation of price given the controls (their R² above 0.9999), a price term
# that cannot be fitted is put down to the controls rather than to the prices.
TIED_VIF = 1e4


def sentence(code: int, *, n: int, folds: int, coefficients: int, distinct: int, unserved: str | None = None,
             weighed: bool = False) -> str | None:
    """The plain-language reason for ``code``, with the series' numbers.  ``folds``: the fewest folds the
    scheme splits a series into; ``unserved``: the family's own reason for ``NOT_SERVED``; ``weighed``: the
    series has rows of weight 0, which ``n`` and ``distinct`` leave out (and the sentence says so)."""
    if code == NONE:
        return None
    positive = " of positive weight" if weighed else ""
    if code == TOO_FEW_FOR_FOLDS:
        return f"{n} observation{'s' * (n != 1)}{positive} cannot be split into {folds} folds"
    if code == FLAT_PRICE:
        return "every observation has the same price, so no curve in price can be estimated"
    if code == TOO_FEW_POINTS:
        return f"{coefficients} coefficients need more than {coefficients} observations; the series has {n}{positive}"
    if code == RANK_ALL:
        return (f"{distinct} distinct prices{positive} cannot pin down {coefficients} coefficients (too few, or too "
                "close together)")
    if code == RANK_FOLD:
        return (f"the training rows of some fold cannot pin down {coefficients} coefficients "
                f"(too few distinct prices, or too close together; {distinct} in all{positive})")
    if code == LEVERAGE_ONE:
        return "an observation alone determines a coefficient, so leaving it out leaves the curve undefined"
    if code == NOT_SERVED:
        return unserved
    if code == NO_WEIGHT:
        return "every observation of this series weighs zero, so there is nothing to fit"
    if code == WEIGHT_OVERFLOW:
        return "the weights are too large: weighted sums of squares overflow (scale the weights down)"
    if code == CONTROL_TIED:
        return "price moves in step with the controls in this series, so its effect cannot be told apart from theirs"
    if code == HELD_OUT_OVERFLOW:
        return ("its held-out errors overflow: a price or volume far from the others (a mistyped one?) sends a "
                "prediction beyond the range of numbers")
    raise ValueError(f"unknown reason code {code}")


def distinct_count(values: np.ndarray) -> int:
    return int(len(np.unique(values)))
