"""The fields a fit with controls adds to a results file, written and read back (absent without controls).

Per candidate: ``controls`` {term: coefficient} in the term's own units, on the
family's fit scale (ln volume for the log families), null where the term is
left out for the series.  Per series: ``control_values`` {term: value} the
values every curve, interval, elasticity, revenue-best price and flag holds the
controls at; ``controls_left_out`` {term: why}; ``price_vif`` the variance
inflation of price given the controls kept.  The header's settings gain
``controls`` (the terms, which are 0/1, the season pairs, and what the plan
values default to).  Parquet stores the dictionaries as JSON text, as it
stores ``flags``, and for pricefold itself ``control_coef`` (each cell's
coefficients, NaN where unavailable) and ``control_plan`` (each series' values),
so stored results open without parsing text per cell.
"""
from __future__ import annotations

import json
import math

import numpy as np

from ..arrays import from_numpy, repeated, text, texts
from ..fit.controls import CONSTANT, KEPT, REDUNDANT, ControlSpec
from ..fit.results import ControlResults, Results

WHY = {CONSTANT: "{name} does not vary within this series",
       REDUNDANT: "{name} adds nothing beyond the other controls in this series (it moves exactly with them)"}
# What stored results read (``stored``): the rest is for other readers.
CONTROL_COLUMNS = ("controls_left_out", "price_vif", "control_coef", "control_plan")


def _num(value) -> float | None:
    value = float(value)
    return value if math.isfinite(value) else None


# What a controlled fit's ``cov_unscaled`` is (the header says so): results written before it was this hold
# the price columns' own (XᵀWX)⁻¹, too narrow away from the plan price, and are read as holding none.
COV_AT_PLAN = "the full design's, at the plan's control values"


def cov_known(settings: dict) -> bool:
    """Whether a results header's ``cov_unscaled`` can be used: without controls, or marked ``COV_AT_PLAN``."""
    controls = settings.get("controls")
    return not controls or controls.get("cov_unscaled") == COV_AT_PLAN


def header_settings(results: Results) -> dict:
    """``settings.controls`` of the header: the terms, the 0/1 ones, the season pairs, the plan values' defaults."""
    ctl = results.controls
    columns = ctl.names[:len(ctl.names) - 2 * ctl.season]
    spec = ControlSpec(columns, ctl.binary[:len(columns)], ctl.season)
    return {"terms": list(ctl.names), "binary": [n for n, b in zip(ctl.names, ctl.binary) if b],
            "season": ctl.season, "plan_values": spec.defaults(), "cov_unscaled": COV_AT_PLAN}


def candidate_controls(ctl: ControlResults, s: int, c: int, available: bool) -> dict | None:
    """{term: coefficient}, null where left out; None when the candidate is unavailable."""
    if not available:
        return None
    return {name: _num(ctl.coef[s, c, j]) if ctl.left_out[s, j] == KEPT else None for j, name in enumerate(ctl.names)}


def series_controls(ctl: ControlResults, s: int) -> dict:
    """The series-level fields: ``control_values``, ``controls_left_out``, ``price_vif``."""
    return {"control_values": {name: _num(ctl.plan[s, j]) for j, name in enumerate(ctl.names)},
            "controls_left_out": left_out_of(ctl, s),
            "price_vif": _num(ctl.vif[s])}


def left_out_of(ctl: ControlResults, s: int) -> dict:
    return {name: WHY[int(ctl.left_out[s, j])].format(name=name) for j, name in enumerate(ctl.names)
            if ctl.left_out[s, j] != KEPT}


def series_texts(results: Results) -> dict:
    """(S,) Arrow text per series, made once for every series: ``control_values`` and ``controls_left_out``, the
    ``json.dumps`` of ``series_controls``' dictionaries, put together term by term column-wise (no Python per
    series)."""
    import pyarrow.compute as pc
    ctl = results.controls
    n_s, m = results.available.shape[0], len(ctl.names)
    plan = np.asarray(ctl.plan, dtype=float).reshape(n_s, m)
    why = []  # each left-out term's ", name: why" (empty where kept), joined, the first ", " dropped
    for j, name in enumerate(ctl.names):
        key = f", {json.dumps(name, ensure_ascii=False)}: "
        words = np.array(["", *(key + json.dumps(WHY[code].format(name=name), ensure_ascii=False)
                                for code in (CONSTANT, REDUNDANT))], dtype=object)
        why.append(words[np.select([ctl.left_out[:, j] == CONSTANT, ctl.left_out[:, j] == REDUNDANT], [1, 2], 0)])
    left_out = (pc.binary_join_element_wise(text("{"), pc.utf8_slice_codeunits(
        pc.binary_join_element_wise(*[texts(w) for w in why], text("")), 2), text("}"), text(""))
        if m else repeated("{}", n_s))
    return {"control_values": _json_object(ctl.names, [_json_numbers(plan[:, j]) for j in range(m)], rows=n_s),
            "controls_left_out": left_out}


def parquet_columns(results: Results, lo: int, hi: int, repeat_text, texts: dict) -> dict:
    """The Parquet columns of series ``lo``…``hi - 1`` (one row per series × candidate); ``repeat_text`` makes
    a per-series text column of ``texts`` (``series_texts``).  The cells' JSON text is the ``json.dumps`` of
    ``candidate_controls``, put together term by term column-wise (no Python per cell)."""
    import pyarrow as pa
    import pyarrow.compute as pc
    ctl, n_c = results.controls, len(results.candidates)
    n_s, m = hi - lo, len(ctl.names)
    ok = results.available[lo:hi].ravel()
    kept = np.repeat(np.asarray(ctl.left_out[lo:hi]) == KEPT, n_c, axis=0)  # (cells, m)
    coef = np.where(ok[:, None], np.asarray(ctl.coef[lo:hi], dtype=float).reshape(n_s * n_c, m), np.nan)
    plan = np.asarray(ctl.plan[lo:hi], dtype=float).reshape(n_s, m)
    cells = _json_object(ctl.names, [np.where(kept[:, j], _json_numbers(coef[:, j]), "null") for j in range(m)],
                         rows=n_s * n_c)
    return {"controls": pc.if_else(from_numpy(ok), cells, pa.nulls(1, pa.string())[0]),
            "control_values": repeat_text(texts["control_values"]),
            "controls_left_out": repeat_text(texts["controls_left_out"]),
            "price_vif": np.repeat(np.asarray(ctl.vif[lo:hi], dtype=float), n_c),
            "control_coef": pa.FixedSizeListArray.from_arrays(from_numpy(coef.ravel()), m),
            "control_plan": pa.FixedSizeListArray.from_arrays(from_numpy(np.repeat(plan, n_c, axis=0).ravel()), m)}


def _json_numbers(values: np.ndarray) -> np.ndarray:
    """Each number as ``json.dumps`` writes it (``repr``), ``null`` where not finite (``_num``)."""
    out = np.full(len(values), "null", dtype=object)
    finite = np.isfinite(values)
    out[finite] = np.char.mod("%r", values[finite].astype(object)).astype(object)
    return out


def _json_object(names, values: list, rows: int):
    """Arrow text: ``json.dumps({names[j]: values[j][i] ...})`` for each row i, the values already JSON."""
    import pyarrow.compute as pc
    if not names:
        return repeated("{}", rows)
    pieces = []
    for j, name in enumerate(names):
        key = ("{" if j == 0 else ", ") + json.dumps(name, ensure_ascii=False) + ": "
        pieces += [text(key), texts(values[j])]
    return pc.binary_join_element_wise(*pieces, text("}"), text(""))


def record_fields(row: dict, into_candidate: dict, series: dict) -> None:
    """A Parquet row's control fields put back into the JSON layout (``read``)."""
    if "controls" not in row:
        return
    into_candidate["controls"] = json.loads(row["controls"]) if row["controls"] is not None else None
    series.setdefault("control_values", json.loads(row["control_values"]))
    series.setdefault("controls_left_out", json.loads(row["controls_left_out"]))
    series.setdefault("price_vif", row["price_vif"])


def stored_controls(table, settings: dict, n_s: int, n_c: int, numbers) -> ControlResults | None:
    """The ``ControlResults`` of a stored Parquet table (None when the fit had no controls)."""
    meta = settings.get("controls")
    if not meta or "control_coef" not in table.column_names:
        return None
    names = tuple(meta["terms"])
    m = len(names)
    binary = tuple(name in meta["binary"] for name in names)
    coef = numbers(table.column("control_coef").combine_chunks().flatten()).reshape(n_s, n_c, m)
    every = np.arange(0, n_s * n_c, max(n_c, 1))
    plan = numbers(table.column("control_plan").combine_chunks().flatten()).reshape(n_s * n_c, m)[every]
    vif = numbers(table.column("price_vif").combine_chunks())[every]
    left_out = np.zeros((n_s, m), dtype=np.int8)
    texts, index = _distinct_texts(table.column("controls_left_out"), n_c)
    for i, text in enumerate(texts):
        for name, why in json.loads(text or "{}").items():
            if name in names:
                code = REDUNDANT if "adds nothing" in why else CONSTANT
                left_out[index == i, names.index(name)] = code
    tied = np.full(n_s, -1, dtype=np.int64)  # the flag's sentence is stored; what it names is not needed again
    return ControlResults(names, binary, int(meta["season"]), np.nan_to_num(coef), left_out, plan, vif, tied)


def _distinct_texts(column, n_c: int):
    """(distinct texts, each series' index into them) of a per-series text column (one value a row)."""
    import pyarrow as pa
    column = column.combine_chunks()
    if pa.types.is_dictionary(column.type):
        return column.dictionary.to_pylist(), np.asarray(column.indices)[::max(n_c, 1)]
    texts, index = np.unique(np.array(column.to_pylist(), dtype=object)[::max(n_c, 1)], return_inverse=True)
    return texts.tolist(), index
