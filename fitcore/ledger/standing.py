"""The decisions standing in a ledger, column by column: what a backtest needs from it.

``standing_of(histories)`` reads each series' standing decision (accept, override or carry), its
latest record and its signed snapshot once, into arrays; after that nothing looks at a record again.
Small to send to another process (``fit --ledger`` reads the ledger beside the fit) or to split by
partition (``--engine dask``).
"""
from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np

from .snapshot import interval_cov, signed_plan

DECISIONS = ("accept", "override", "carry")
WIDTH = 6  # the widest candidate's coefficients (poly5); signed curves are padded to it


@dataclass(frozen=True, eq=False)
class Standing:
    """n standing decisions.  ``series``: their keys (dicts); text (object arrays): ``fingerprint``,
    ``decision`` (digest), ``carries`` (the accept or override it stands for), ``latest`` (digest of
    the series' latest record), ``analyst``, ``signed_at`` (date), ``candidate``, ``family``;
    ``signed`` (bool: a snapshot was recorded); its curve: ``size``, ``coef`` (n, WIDTH) in its basis,
    ``mid``, ``half``, ``smear``, ``cov`` (n, WIDTH, WIDTH), ``sigma2``, ``df``, ``level``, ``cv_mse``
    (NaN where not recorded), ``last_date`` (datetime64[D], NaT where none); ``controls`` (text: the
    control terms it was fitted with, joined by "|", "" for none; None without a snapshot); what was signed
    at the plan price then: ``plan_price``, ``plan_volume``, ``plan_lo``, ``plan_hi`` (NaN without a plan);
    ``n``: the rows it was signed on (-1 where not recorded); ``weight`` (text: the weight column it was
    fitted with, "" unweighted; None where the snapshot predates its record, or none) and ``cv`` (dicts: the
    settings that chose its shape, ``snapshot.fit_terms``; None where not recorded); for a standing carry,
    the accept or override it carries: ``carried_action``, ``carried_analyst``, ``carried_at`` (date; None
    where the standing decision is not a carry, or its decision is not in the history)."""

    series: list
    fingerprint: np.ndarray
    decision: np.ndarray
    carries: np.ndarray
    latest: np.ndarray
    analyst: np.ndarray
    signed_at: np.ndarray
    candidate: np.ndarray
    family: np.ndarray
    signed: np.ndarray
    size: np.ndarray
    coef: np.ndarray
    mid: np.ndarray
    half: np.ndarray
    smear: np.ndarray
    cov: np.ndarray
    sigma2: np.ndarray
    df: np.ndarray
    level: np.ndarray
    cv_mse: np.ndarray
    last_date: np.ndarray
    controls: np.ndarray
    plan_price: np.ndarray
    plan_volume: np.ndarray
    plan_lo: np.ndarray
    plan_hi: np.ndarray
    n: np.ndarray
    weight: np.ndarray
    cv: np.ndarray
    carried_action: np.ndarray
    carried_analyst: np.ndarray
    carried_at: np.ndarray

    def __len__(self) -> int:
        return len(self.series)

    def take(self, index) -> "Standing":
        index = np.asarray(index, dtype=np.int64)
        return Standing(**{f.name: [self.series[i] for i in index.tolist()] if f.name == "series"
                           else getattr(self, f.name)[index] for f in fields(self)})


def standing_of(histories: dict) -> Standing:
    """The standing decisions of every series in ``histories`` (a ledger's replay)."""
    from ..collector import collector_paused
    with collector_paused():  # new objects by the 100,000 over a heap of records: no collection passes
        return _standing_of(histories)


def _standing_of(histories: dict) -> Standing:
    standing = [h for h in histories.values() if h.current is not None and h.current["action"] in DECISIONS]
    pairs = [(h.current, h.latest) for h in standing]
    carried = [h.carried if h.current["action"] == "carry" else None for h in standing]
    n = len(pairs)
    current = [c for c, _ in pairs]
    snaps = [c.get("signed") for c in current]
    has = [s is not None and isinstance(s.get("basis"), dict) for s in snaps]
    signed = [s for s, ok in zip(snaps, has) if ok]
    at = np.flatnonzero(np.array(has, dtype=bool)) if n else np.zeros(0, np.int64)
    text = lambda values: np.array(values + [None], dtype=object)[:-1]  # noqa: E731  (1-d even for lists)
    coef, cov = np.full((n, WIDTH), np.nan), np.full((n, WIDTH, WIDTH), np.nan)
    size = np.zeros(n, np.int64)
    if signed:  # each list of numbers to an array in one go per curve size (None → NaN)
        size[at] = [len(s["basis"]["coef"]) for s in signed]
        for k in np.unique(size[at]).tolist():
            mine = np.flatnonzero(size[at] == k)
            group = [signed[i] for i in mine.tolist()]
            coef[at[mine], :k] = np.array([s["basis"]["coef"] for s in group], dtype=float)
            covs = [interval_cov(s) for s in group]
            whole = np.array([c is not None for c in covs], dtype=bool)
            if whole.any():
                cov[at[mine[whole]], :k, :k] = np.array([c for c in covs if c is not None], dtype=float)
    plans = [signed_plan(s) for s in signed]
    numbers = np.array([(s["basis"]["mid"], s["basis"]["half"], s.get("smearing"), s.get("sigma2"), s.get("df"),
                         s.get("level", 0.95), s.get("cv_mse"), p.get("price"), p.get("volume"), p.get("lo"),
                         p.get("hi")) for s, p in zip(signed, plans)], dtype=float).reshape(-1, 11)
    column = lambda i: _scatter(at, numbers[:, i], n)  # noqa: E731
    return Standing(
        series=[c["series"] for c in current], fingerprint=text([c["fingerprint"] for c in current]),
        decision=text([c["digest"] for c in current]),
        carries=text([c.get("carries") or c["digest"] for c in current]),
        latest=text([latest["digest"] for _, latest in pairs]), analyst=text([c["analyst"] for c in current]),
        signed_at=text([c["at"][:10] for c in current]),
        candidate=text([s["candidate"] if ok else c.get("model") for s, ok, c in zip(snaps, has, current)]),
        family=text([s["family"] if ok else None for s, ok in zip(snaps, has)]), signed=np.array(has, dtype=bool),
        size=size, coef=coef, mid=column(0), half=column(1), smear=column(2), cov=cov, sigma2=column(3),
        df=column(4), level=column(5), cv_mse=column(6),
        last_date=_dates(at, [s.get("last_date") for s in signed], n),
        controls=text(["|".join(s.get("controls") or ()) if ok else None for s, ok in zip(snaps, has)]),
        plan_price=column(7), plan_volume=column(8), plan_lo=column(9), plan_hi=column(10),
        n=_rows_signed(at, [s.get("n") for s in signed], n),
        weight=text([(s.get("weight") or "") if ok and "weight" in s else None for s, ok in zip(snaps, has)]),
        cv=text([s.get("cv") if ok else None for s, ok in zip(snaps, has)]),
        carried_action=text([c and c["action"] for c in carried]),
        carried_analyst=text([c and c["analyst"] for c in carried]),
        carried_at=text([c and c["at"][:10] for c in carried]))


def _rows_signed(at: np.ndarray, values: list, n: int) -> np.ndarray:
    out = np.full(n, -1, np.int64)
    out[at] = [v if isinstance(v, int) and not isinstance(v, bool) else -1 for v in values]
    return out


def _scatter(at: np.ndarray, values: np.ndarray, n: int) -> np.ndarray:
    out = np.full(n, np.nan)
    out[at] = values
    return out


def _dates(at: np.ndarray, values: list, n: int) -> np.ndarray:
    out = np.full(n, np.datetime64("NaT"), dtype="datetime64[D]")
    out[at] = np.array([v or "NaT" for v in values], dtype="datetime64[D]")
    return out


def by_partition(standing: Standing, key_names: tuple[str, ...], n_parts: int) -> list[Standing]:
    """``standing`` split by the partition its series' key hash picks (``scale.dask_engine.partition_of``),
    so each partition of a Dask fit is sent only its own series' decisions."""
    from ..data.dataset import hash_keys
    if not len(standing):
        return [standing] * n_parts
    keys = {name: np.array([str(key.get(name, "")) for key in standing.series], dtype=object) for name in key_names}
    parts = (hash_keys(keys) % np.uint64(n_parts)).astype(np.int64)
    return [standing.take(np.flatnonzero(parts == p)) for p in range(n_parts)]
