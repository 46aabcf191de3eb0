"""fit_batch: every candidate, every fold, every series, in a few array passes.

Series are processed in chunks of whole series (about ``CHUNK_ROWS`` rows)
so that work arrays stay cache-sized; within a chunk nothing loops over
series in Python.  A chunk's fit reads as its stages (``_fit_chunk``):
each family fits every candidate on every fold; the held-out errors become
scores; unavailable cells are marked; the rule chooses; then the plan-price
prediction, the revenue-best price and the largest Cook's distance.  With
controls (``controls``), the chunk carries them, every family fits them beside
its price terms, and the plan-price stages hold them at the plan's values.
"""
from __future__ import annotations

from typing import Callable

import numpy as np

from ..data.dataset import Dataset, series_cuts
from . import reasons as R
from . import stages
from .chunk import Chunk
from .controls import ControlSpec
from .families import Lineup, lineup_for
from .folds import FoldScheme, fold_scheme
from .results import Results
from .selection import choose
from .settings import FitSettings

CHUNK_ROWS = 1 << 17


def fit_batch(data: Dataset, settings: FitSettings = FitSettings(), *, plan_price=None, plan_controls=None,
              plan_date=None, progress: Callable[[int, int], None] | None = None,
              threads: int | None = None) -> Results:
    """Fit, cross-validate and choose a curve for every series of ``data``.

    ``plan_price``: None, one price for every series, or an (S,) array with
    NaN where a series has no plan.  With controls (``data.controls``,
    ``settings.season``): ``plan_controls`` None or column → (S,) plan values
    (NaN: the default), ``plan_date`` None or (S,) datetime64 (NaT: the
    default) for the season terms (``controls.ControlSpec.plan_values``).
    ``progress(done, total)`` is called after each chunk with counts of series.
    ``threads``: chunks fitted at once (None: one a core this process may use, at most two); chunks
    are independent and merged in order, so the results do not depend on it.
    """
    n_series = data.n_series
    plan = np.full(n_series, np.nan) if plan_price is None else np.broadcast_to(
        np.asarray(plan_price, dtype=np.float64), (n_series,)).copy()
    lineup, scheme = lineup_for(settings), fold_scheme(settings)
    scheme.check_rows(data.counts, FitSettings.folds)
    spec = ControlSpec.of(data, settings)
    at_controls = None if spec is None else spec.plan_values(n_series, plan_controls, plan_date)
    merged = None
    cuts = series_cuts(data.offsets, CHUNK_ROWS)
    fold_start = np.concatenate(([0], np.cumsum(scheme.error_counts(data.counts)))).astype(np.int64)

    def one(lo: int, hi: int) -> dict:
        return _fit_chunk(data, lo, hi, settings, lineup, scheme, plan[lo:hi], spec,
                          None if spec is None else at_controls[lo:hi])
    for lo, hi, part in in_order(one, list(zip(cuts[:-1], cuts[1:])), threads):
        if merged is None:  # one allocation per output, filled chunk by chunk
            merged = {name: np.empty((_total(name, n_series, data.n_rows, int(fold_start[-1])),) + value.shape[1:],
                                     dtype=value.dtype) for name, value in part.items()}
        for name, value in part.items():
            merged[name][_span(name, lo, hi, data.offsets, fold_start)] = value
        if progress is not None:
            progress(hi, n_series)
    return Results.build(data, settings, lineup.candidates, plan, merged, spec)


def _fit_chunk(data: Dataset, s0: int, s1: int, settings: FitSettings, lineup: Lineup, scheme: FoldScheme,
               plan: np.ndarray, spec: ControlSpec | None = None, at_controls: np.ndarray | None = None) -> dict:
    ch = Chunk(data, s0, s1, scheme, spec, at_controls)
    fits = [family.fit(ch, lineup.candidates[cols]) for family, cols in lineup.groups]
    if ch.controls is not None:
        stages.hold_controls(ch, lineup, fits)
    cells = stages.gather(ch, lineup, fits)
    scores = scheme.scores(cells.held_out, ch.offsets, ch.weight, ch.moments)
    reason = stages.unavailable(ch, lineup, cells, scores.cv_mse)
    available = reason == R.NONE
    nan = np.nan
    with np.errstate(invalid="ignore", divide="ignore"):
        q2 = np.where(available, 1 - scores.press / scores.held_tss[:, None], nan)
        r2 = np.where(available, 1 - cells.sse / ch.moments.tss[:, None], nan)
    cv_mse, cv_se = np.where(available, scores.cv_mse, nan), np.where(available, scores.cv_se, nan)
    chosen = choose(settings.rule, cv_mse, cv_se, available, lineup.complexity, ch.moments.tss / ch.w_sum)
    plan_volume, plan_lo, plan_hi, plan_elasticity = stages.at_plan(
        lineup, fits, cells, available, plan, settings.level, ch.w_unit,
        None if ch.controls is None else ch.controls.offset)
    top_cook, top_row = stages.influence(ch, lineup, fits, cells, chosen)
    keep = scheme.keep(available, ch.counts)
    held = {} if ch.controls is None else dict(
        control_coef=cells.gamma, control_left_out=ch.controls.left_out, control_plan=ch.controls.plan,
        control_vif=ch.controls.vif, control_tied=ch.controls.tied)
    return held | dict(
        available=available, reason=reason, cv_mse=cv_mse, cv_se=cv_se, r2=r2, q2=q2,
        fold_err=np.where(keep, scores.fold_err, nan).reshape(-1, len(lineup.candidates)),
        n_folds=scheme.error_counts(ch.counts), price_lo=ch.lo, price_hi=ch.hi, mid=ch.window[0],
        half=ch.window[1], basis_mid=cells.mid, basis_half=cells.half, coef=cells.coef, smear=cells.smear,
        sigma2=cells.sigma2 / ch.w_unit[:, None], df=cells.df, chosen=chosen, plan_volume=plan_volume,
        plan_lo=plan_lo, plan_hi=plan_hi, plan_elasticity=plan_elasticity, revenue_price=stages.revenue(ch, lineup, cells, chosen),
        top_cook=top_cook, top_row=np.where(top_row >= 0, top_row + int(data.offsets[s0]), -1),
    )


def _total(name: str, n_series: int, n_rows: int, n_folds: int) -> int:
    return n_folds if name == "fold_err" else n_series


def _span(name: str, lo: int, hi: int, offsets: np.ndarray, fold_start: np.ndarray) -> slice:
    if name == "fold_err":
        return slice(int(fold_start[lo]), int(fold_start[hi]))
    return slice(lo, hi)


def in_order(work: Callable[[int, int], dict], spans: list[tuple[int, int]], threads: int | None):
    """Yield ``(lo, hi, work(lo, hi))`` span by span, in order, computing up to ``threads`` spans at once.

    The compiled loops release the interpreter (``nogil``), so a second thread fits the next chunk
    while this one runs the first one's numpy glue; at most ``threads`` chunks are in flight, so the
    work arrays stay a few chunks' worth."""
    threads = _threads() if threads is None else max(1, int(threads))
    if threads == 1 or len(spans) < 2:
        for lo, hi in spans:
            yield lo, hi, work(lo, hi)
        return
    from collections import deque
    from concurrent.futures import ThreadPoolExecutor
    with ThreadPoolExecutor(threads, thread_name_prefix="pricefold-chunk") as pool:
        pending: deque = deque()
        for lo, hi in spans:
            pending.append((lo, hi, pool.submit(work, lo, hi)))
            if len(pending) > threads:
                lo0, hi0, done = pending.popleft()
                yield lo0, hi0, done.result()
        while pending:
            lo0, hi0, done = pending.popleft()
            yield lo0, hi0, done.result()


def _threads() -> int:
    import os
    try:
        cores = len(os.sched_getaffinity(0))
    except AttributeError:  # not on Linux
        cores = os.cpu_count() or 1
    return max(1, min(2, cores))
