"""Flag sentences for many series at once, as Arrow text: what ``sentences.sentence`` says series by
series, character for character, without Python per series where the sentence is written here
(the common ones: a near tie, a weak fit; at 100k series they are 95% of all flags).  The other
flags are rare and go through ``sentence`` one series at a time.

The numbers are formatted as ``sentences.fmt``, ``money`` and ``pct`` format them: ``%`` formatting
column-wise (``numpy.char.mod``, the same digits as Python's ``format``), thousands separators put
in column-wise by Arrow, the templates filled piece by piece (``string.Formatter`` splits them).
"""
from __future__ import annotations

import string

import numpy as np

from ..arrays import from_numpy, objects, text, texts
from . import sentences as S


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
    out = fill(S.WEAK_FIT, score=pcts(score), wanted=S.pct(diag.thresholds.weak_score))
    undefined = ~np.isfinite(score)  # a volume that never varies: rare, its sentence series by series
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
    """``pct`` of each share."""
    share = np.asarray(share, dtype=float)
    whole = np.char.mod("%.0f", share * 100).astype(object)
    whole[whole == "-0"] = "0"
    finite = np.isfinite(share)
    whole[finite] = _grouped(whole[finite].astype(str))
    return texts(whole + "%")


def fmts(x: np.ndarray):
    """``fmt`` of each number."""
    x = np.asarray(x, dtype=float)
    out = np.full(len(x), "n/a", dtype=object)
    finite = np.isfinite(x)
    size = np.abs(np.where(finite, x, 0.0))
    huge = finite & (size >= S.HUGE)
    whole = finite & ~huge & ((np.trunc(np.where(finite, x, 0.0)) == x) | (size >= 1000))
    hundreds = finite & ~whole & (size >= 100)
    ones = finite & ~whole & ~hundreds & (size >= 1)
    small = finite & ~whole & ~hundreds & ~ones
    out[whole] = _grouped(np.char.mod("%.0f", x[whole]))
    out[hundreds] = _grouped(np.char.mod("%.1f", x[hundreds]))
    out[ones] = np.char.mod("%.2f", x[ones]).astype(object)
    out[small | huge] = np.char.mod("%.3g", x[small | huge]).astype(object)
    return out


def moneys(x: np.ndarray):
    """``money`` of each price."""
    x = np.asarray(x, dtype=float)
    out = np.full(len(x), "n/a", dtype=object)
    finite = np.isfinite(x)
    large = finite & (np.abs(np.where(finite, x, 0.0)) >= 0.1)
    small = finite & ~large
    out[large] = _grouped(np.char.mod("%.2f", x[large]))
    out[small] = np.char.mod("%.3g", x[small]).astype(object)
    return out


def _grouped(plain: np.ndarray) -> np.ndarray:
    """Numbers written without separators ("-1234567.25") with a comma every three digits of the whole
    part ("-1,234,567.25"), as Python's ``,`` format option puts them; a numpy array of text."""
    import pyarrow.compute as pc
    if not len(plain):
        return np.zeros(0, dtype=object)
    parts = pc.extract_regex(texts(plain), r"(?P<sign>-?)(?P<whole>\d+)(?P<rest>.*)")
    whole = pc.utf8_reverse(pc.utf8_rtrim(
        pc.replace_substring_regex(pc.utf8_reverse(parts.field("whole")), r"(\d{3})", r"\1,"), ","))
    joined = pc.binary_join_element_wise(parts.field("sign"), whole, parts.field("rest"), text(""))
    return objects(joined)
