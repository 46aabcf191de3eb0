"""Results of a batch fit: frozen arrays over series × candidates."""
from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from ..data.dataset import Dataset
from . import reasons
from .families import Candidate, Family, Lineup
from .folds import FoldScheme, fold_scheme
from .settings import FitSettings
from .weights import weighed_counts

SCHEMA = "pricefold-results/1"


@dataclass(frozen=True, eq=False)
class ControlResults:
    """The controls of a fit: M terms (the data's control columns, then the season terms).

    ``names`` (M,), ``binary`` (M,) which are 0/1 columns, ``season`` K; per series × candidate ×
    term ``coef`` (S, C, M): each candidate's control coefficients in the term's own units, on the
    family's fit scale (ln volume for the log families), 0 where left out for the series; per
    series × term ``left_out`` (S, M) int8 (``controls.KEPT``, ``CONSTANT``, ``REDUNDANT``) and
    ``plan`` (S, M) the values every curve, interval and flag holds the controls at; per series
    ``vif`` (S,) variance inflation of price given the controls kept and ``tied`` (S,) the term
    moving most with price (-1: none).
    """

    names: tuple[str, ...]
    binary: tuple[bool, ...]
    season: int
    coef: np.ndarray
    left_out: np.ndarray
    plan: np.ndarray
    vif: np.ndarray
    tied: np.ndarray

    @cached_property
    def shift(self) -> np.ndarray:
        """(S, C) Σ coef·plan: what the controls add to each curve at the plan's values (fit scale)."""
        return np.einsum("scm,sm->sc", np.asarray(self.coef), self.plan)

    @cached_property
    def kept(self) -> np.ndarray:
        return (np.asarray(self.left_out) == 0).sum(axis=1)


@dataclass(frozen=True, eq=False)
class Results:
    """Everything ``fit_batch`` computed.  S series, C candidates, P = the widest candidate's coefficients.

    Per series × candidate (S, C): ``available``, ``reason`` (int8 codes, see
    ``reasons``), ``cv_mse``, ``cv_se``, ``r2``, ``q2``, ``sigma2`` (residual
    variance on the family's fit scale: ln volume for log families), ``df``,
    the plan-price columns ``plan_volume``, ``plan_lo``, ``plan_hi``,
    ``plan_elasticity``, and each candidate's basis: ``coef`` (S, C, P)
    coefficients of powers of t = (x − basis_mid)/basis_half, x its family's
    regressor (``Family.regressor``), ``basis_mid``, ``basis_half`` (S, C),
    and ``smear`` (S, C) Duan's smearing factor (NaN for families without one).
    ``fold_err``: (F, C) held-out MSE of each fold, series s owning rows
    ``fold_start[s]:fold_start[s + 1]`` (K folds, or one per observation for
    leave-one-out).  Per series (S,): ``chosen`` (-1 when nothing is
    available), ``price_lo``, ``price_hi``, ``mid``, ``half`` (the price
    window), ``plan_price``, ``revenue_price``.  Under the chosen curve, per
    series: ``top_cook``, the largest Cook's distance of its rows (-1 where
    none), and ``top_row``, the dataset row holding it (-1 where none);
    ``influence.series_influence`` gives every row's.  With controls, ``coef``
    is each price curve at the plan's control values (``controls.plan``) and
    ``controls`` holds the rest (``ControlResults``).
    """

    data: Dataset
    settings: FitSettings
    candidates: tuple[Candidate, ...]
    available: np.ndarray
    reason: np.ndarray
    cv_mse: np.ndarray
    cv_se: np.ndarray
    r2: np.ndarray
    q2: np.ndarray
    fold_err: np.ndarray
    fold_start: np.ndarray
    coef: np.ndarray
    sigma2: np.ndarray
    df: np.ndarray
    chosen: np.ndarray
    price_lo: np.ndarray
    price_hi: np.ndarray
    mid: np.ndarray
    half: np.ndarray
    basis_mid: np.ndarray
    basis_half: np.ndarray
    smear: np.ndarray
    plan_price: np.ndarray
    plan_volume: np.ndarray
    plan_lo: np.ndarray
    plan_hi: np.ndarray
    plan_elasticity: np.ndarray
    revenue_price: np.ndarray
    top_cook: np.ndarray
    top_row: np.ndarray
    controls: ControlResults | None = None  # with controls: their coefficients, plan values, left-outs

    rows_loaded = True  # the observations are in ``data`` (False for results read back from a file)
    complete = True  # every column is in (results read back from a file may still be reading some)
    numbers_ready = True  # every candidate's numbers are in (results read back from a file: just after the list's)

    @classmethod
    def build(cls, data: Dataset, settings: FitSettings, candidates, plan_price, parts: dict | None,
              spec=None) -> "Results":
        n_c = len(candidates)
        if parts is None:  # no series at all
            parts = _empty(n_c, Lineup.of(candidates).width, 0 if spec is None else len(spec.names))
        n_folds = parts.pop("n_folds")
        fold_start = np.concatenate(([0], np.cumsum(n_folds))).astype(np.int64)
        held = {name[len("control_"):]: parts.pop(name) for name in list(parts) if name.startswith("control_")}
        fields = dict(parts, fold_start=fold_start, plan_price=plan_price)
        for array in [*fields.values(), *held.values()]:
            if isinstance(array, np.ndarray):
                array.flags.writeable = False
        if spec is not None:
            binary = (*spec.binary, *[False] * (2 * spec.season))
            fields["controls"] = ControlResults(tuple(spec.names), binary, spec.season, **held)
        return cls(data=data, settings=settings, candidates=tuple(candidates), **fields)

    @property
    def n_series(self) -> int:
        return self.data.n_series

    @cached_property
    def names(self) -> list[str]:
        return [c.name for c in self.candidates]

    @cached_property
    def lineup(self) -> Lineup:
        return Lineup.of(self.candidates)

    @cached_property
    def scheme(self) -> FoldScheme:
        return fold_scheme(self.settings)

    def family_of(self, c: int) -> Family:
        return self.lineup.family_of(c)

    @cached_property
    def weight_0(self) -> np.ndarray | None:
        """(S,) int64 how many of each series' ``n`` rows weigh 0; None for an unweighted fit (or results read
        back from a file that does not say: ``stored_weight_0``)."""
        weight = self.data.weight
        if not self.rows_loaded or weight is None or len(weight) != self.data.offsets[-1]:
            return getattr(self, "stored_weight_0", None)
        zero = self.data.counts - weighed_counts(weight, self.data.offsets)
        zero.flags.writeable = False
        return zero

    @cached_property
    def score(self) -> np.ndarray:
        """(S,) Q² of the chosen candidate (NaN where none was chosen)."""
        picked = np.take_along_axis(self.q2, np.maximum(self.chosen, 0)[:, None], axis=1)[:, 0]
        score = np.where(self.chosen >= 0, picked, np.nan)
        score.flags.writeable = False
        return score

    def power_coef(self, s: int, c: int) -> list[float]:
        """Coefficients in plain units: poly Σ cᵢ·priceⁱ; loglog [a, e] of ln volume = a + e·ln price;
        semilog [a, b] of ln volume = a + b·price (``Family.plain``).  With controls, the price part
        with every control at 0: the curve is this plus Σ control coefficient·value."""
        size = self.candidates[c].complexity
        plain = self.family_of(c).plain(self.coef[s, c, :size], self.basis_mid[s, c], self.basis_half[s, c])
        if self.controls is not None:
            plain[0] -= self.controls.shift[s, c]
        return plain.tolist()

    def folds_of(self, s: int) -> np.ndarray:
        """(K, C) held-out MSE per fold of series ``s``."""
        return self.fold_err[self.fold_start[s]:self.fold_start[s + 1]]

    def reason_text(self, s: int, c: int) -> str | None:
        code = int(self.reason[s, c])
        if code == reasons.NONE:
            return None
        rows = slice(self.data.offsets[s], self.data.offsets[s + 1])
        kept = 0 if self.controls is None else int(self.controls.kept[s])
        price, weight = self.data.price[rows], self.data.weight
        weighed = weight is not None and bool((weight[rows] == 0).any())  # rows of weight 0 are no observations
        if weighed:
            price = price[weight[rows] > 0]
        return reasons.sentence(code, n=len(price), folds=self.scheme.fewest_folds,
                                coefficients=self.candidates[c].complexity + kept,
                                distinct=reasons.distinct_count(price),
                                unserved=self.family_of(c).unserved_reason, weighed=weighed)


def _empty(n_c: int, p: int, m: int = 0) -> dict:
    z = lambda *shape, dtype=float: np.zeros(shape, dtype=dtype)  # noqa: E731
    parts = {name: z(0, n_c) for name in ("cv_mse", "cv_se", "r2", "q2", "sigma2", "plan_volume", "plan_lo",
                                          "plan_hi", "plan_elasticity", "basis_mid", "basis_half", "smear")}
    parts.update(available=z(0, n_c, dtype=bool), reason=z(0, n_c, dtype=np.int8), df=z(0, n_c, dtype=np.int64),
                 fold_err=z(0, n_c), coef=z(0, n_c, p), chosen=z(0, dtype=np.int64), n_folds=z(0, dtype=np.int64),
                 top_row=z(0, dtype=np.int64))
    parts.update({name: z(0) for name in ("price_lo", "price_hi", "mid", "half", "revenue_price", "top_cook")})
    if m:
        parts.update(control_coef=z(0, n_c, m), control_left_out=z(0, m, dtype=np.int8), control_plan=z(0, m),
                     control_vif=z(0), control_tied=z(0, dtype=np.int64))
    return parts
