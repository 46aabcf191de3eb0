"""Flag sentences for many series at once, as Arrow text: what ``sentences.sentence`` says series by
series, character for character, without a sentence made per series where the sentence is written here
(the common ones: a near tie, a weak fit; at 100k series they are 95% of all flags).  The other
flags are rare and go through ``sentence`` one series at a time.

The numbers are formatted by ``formats.fmt``, ``money`` and ``pct`` themselves, number by number (an
f-string a number: 2–4× faster than ``numpy.char.mod`` and Arrow's regular expressions putting in the
thousands separators, which this did before), the templates filled piece by piece in Arrow
(``string.Formatter`` splits them).
"""
from __future__ import annotations

import string

import numpy as np

from ..arrays import from_numpy, text, texts
from . import sentences as S
from .formats import fmt, money, pct, pct_beside


def flag_sentences(diag, series: np.ndarray, code: str):
    """Arrow text: ``sentence(diag, s, code)`` for every s in ``series``."""
    many = _MANY.get(code)
    if many is not None:
        return many(diag, np.asarray(series, dtype=np.int64))
    return texts([S.sentence(diag, s, code) for s in np.asarray(series).tolist()])


def _near_tie(diag, series):
    import pyarrow.compute as pc
    r, n = diag.results, diag.numbers
    chosen, rival = r.chosen[series].astype(np.int64), n["rival"][series].astype(np.int64)
    plan, change = r.plan_price[series], n["rival_change"][series]
    names = np.array(r.names, dtype=object)
    where = pc.if_else(from_numpy(np.isfinite(plan)), fill(S.AT_PLAN, price=moneys(plan)), text(S.AT_MID))
    rival_volume, chosen_volume = n["rival_volume"][series], n["chosen_volume"][series]
    difference = pc.if_else(
        from_numpy(np.asarray(S.share_reads(rival_volume, chosen_volume), dtype=bool)),
        fill(S.NEAR_TIE_SHARE, change=pcts(np.abs(change)), direction=np.where(change > 0, "more", "less").astype(object),
             chosen=names[chosen]),
        fill(S.NEAR_TIE_VOLUMES, rival_volume=fmts(rival_volume), chosen=names[chosen], chosen_volume=fmts(chosen_volume)))
    return fill(S.NEAR_TIE, rival=names[rival], rival_mse=fmts(r.cv_mse[series, rival]),
                chosen_mse=fmts(r.cv_mse[series, chosen]), chosen_se=fmts(r.cv_se[series, chosen]),
                difference=difference, where=where)


def _weak_fit(diag, series):
    import pyarrow.compute as pc
    score = diag.results.score[series]
    bar = diag.thresholds.weak_score
    out = fill(S.WEAK_FIT, score=texts([pct_beside(value, bar) for value in score.tolist()]), wanted=pct(bar))
    # a volume that never varies, or a price that never did (nothing to explain volume by): rare, series by series
    undefined = ~np.isfinite(score) | S.unvaried(diag.results)[series]
    if not undefined.any():
        return out
    said = texts([S.sentence(diag, s, "weak-fit") for s in series[undefined].tolist()])
    return pc.replace_with_mask(out, from_numpy(undefined), said)


_MANY = {"near-tie": _near_tie, "weak-fit": _weak_fit}


def fill(template: str, **fields):
    """Arrow text: ``template.format(**row)`` for each row of ``fields`` (arrays of text, or one text;
    at least one an array)."""
    import pyarrow as pa
    import pyarrow.compute as pc
    pieces = []
    for literal, name, spec, conversion in string.Formatter().parse(template):
        if spec or conversion:
            raise ValueError(f"fill takes plain fields only, got {{{name}:{spec}}} in {template!r}")
        if literal:
            pieces.append(text(literal))
        if name is not None:
            value = fields[name]
            pieces.append(value if isinstance(value, pa.Array) else text(value) if isinstance(value, str)
                          else texts(value))
    return pc.binary_join_element_wise(*pieces, text(""))


def pcts(share: np.ndarray):
    """``pct`` of each share (Arrow text)."""
    return texts([pct(value) for value in np.asarray(share, dtype=float).tolist()])


def fmts(x: np.ndarray) -> list[str]:
    """``fmt`` of each number."""
    return [fmt(value) for value in np.asarray(x, dtype=float).tolist()]


def moneys(x: np.ndarray) -> list[str]:
    """``money`` of each price."""
    return [money(value) for value in np.asarray(x, dtype=float).tolist()]
