"""One chunk of whole series, its rows in the working order of its fold layout.

Everything a family needs to fit the chunk: the rows (price, volume,
weight), each series' price window and the price mapped onto it, the
volume centred, the fold layout and its scheme, the weighted sums of
the centred volume that Q² and R² are judged by, and the controls (centred
per series, ``controls``) when the fit has any.
"""
from __future__ import annotations

import numpy as np

from ..compiled import readonly
from ..data.dataset import Dataset
from . import reasons
from .basis import window, window_rows
from .controls import ControlSpec, chunk_controls
from .folds import FoldScheme, deal_columns
from .scores import moments
from .segments import segment_sums
from .weights import unit, weighed_counts


class Chunk:
    """Series ``s0 … s1 − 1`` of a dataset.  Row arrays (N,) in working order; per series (S,).

    ``t``: price mapped onto each series' window [``lo``, ``hi``], the prices of its rows of positive
    weight (``window``: mid, half); ``y``: volume less its weighted mean ``ybar``; ``v_low``, ``p_low``:
    the least volume and price of every row (a row of weight 0 too: the log families take logs of every
    row); ``n_obs``: the rows
    of positive weight; ``w_unit``: their mean weight, the planned week's (``weights.unit``); ``w_sum``:
    total weight; ``weight_reason``: ``reasons.NO_WEIGHT`` or ``WEIGHT_OVERFLOW`` for a series its
    weights leave nothing to fit, else 0; ``lay``: the fold layout; ``moments``: ``scores.Moments`` of ``y``;
    ``controls``: ``controls.ChunkControls`` (None without controls).
    """

    def __init__(self, data: Dataset, s0: int, s1: int, scheme: FoldScheme, spec: ControlSpec | None = None,
                 plan: np.ndarray | None = None) -> None:
        r0, r1 = int(data.offsets[s0]), int(data.offsets[s1])
        self.scheme = scheme
        self.offsets = data.offsets[s0:s1 + 1] - r0
        self.counts = np.diff(self.offsets)
        raw_weight = None if data.weight is None else data.weight[r0:r1]
        rows = {"date": None if data.date is None else data.date[r0:r1], "weight": raw_weight}
        if scheme.keyed:
            rows.update(key_hash=data.key_hash[s0:s1], price=data.price[r0:r1], volume=data.volume[r0:r1],
                        more=[] if data.date is not None else [values[r0:r1] for values in deal_columns(data)])
        self.lay = scheme.layout(self.offsets, **rows)
        order = self.lay.order

        def take(array):
            if array is None:
                return None
            return array[r0:r1] if order is None else array[r0:r1][order]

        self.price, self.volume, self.weight = take(data.price), take(data.volume), take(data.weight)
        self.whole = np.stack([self.offsets[:-1], self.offsets[1:]], axis=1)
        self.n_obs = weighed_counts(self.weight, self.offsets)
        self.weight_reason = np.zeros(len(self.counts), np.int8)  # weights that leave nothing to fit
        with np.errstate(over="ignore", invalid="ignore"):
            w_sum = self.counts.astype(float) if self.weight is None else self.sums(self.weight)
            if self.weight is not None:  # Σ w·v² bounds every weighted sum the families form
                big = self.sums(self.weight * self.volume * self.volume)
                self.weight_reason[~np.isfinite(w_sum) | ~np.isfinite(big)] = reasons.WEIGHT_OVERFLOW
                self.weight_reason[w_sum == 0] = reasons.NO_WEIGHT
        self.w_unit = unit(self.weight, self.offsets, self.n_obs, w_sum)
        self.w_sum = np.where(w_sum > 0, w_sum, 1.0)
        self.t, self.y, self.lo, self.hi, self.ybar, self.v_low, self.p_low = self.windowed(self.price, self.volume)
        self.window = window(self.lo, self.hi)
        self.moments = moments(self.y, self.weight, self.lay.bounds, self.lay.held_out)
        self.controls = None if spec is None else chunk_controls(spec.raw(data, r0, r1, order), self.weight,
                                                                 self.offsets, plan)

    def windowed(self, x: np.ndarray, y: np.ndarray, use: np.ndarray | None = None):
        """(x mapped onto each series' window, y less its weighted mean, lo, hi, mean y, least y, least x);
        series outside ``use`` get zeros throughout (``basis.window_rows``)."""
        t, centred = np.empty(len(x)), np.empty(len(x))
        lo, hi, mean, least, x_least = (np.empty(len(self.counts)) for _ in range(5))
        window_rows(readonly(x), readonly(y), readonly(np.empty(0) if self.weight is None else self.weight),
                    readonly(self.offsets), readonly(np.empty(0, bool) if use is None else use), t, centred, lo, hi,
                    mean, least, x_least)
        return t, centred, lo, hi, mean, least, x_least

    def sums(self, values: np.ndarray) -> np.ndarray:
        return segment_sums(values, self.whole)[:, 0]
