"""Writing results files: JSON for small runs, Parquet for large ones.

Both carry ``pricefold-results/1``; the README documents the fields.  Files
are written with the project's one atomic writer (``fitcore.outputs``), so an
interrupted run never leaves a half-written results file.
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from ..data.columns import is_parquet_name
from ..errors import DataError
from ..fit.results import SCHEMA, Results
from ..outputs import atomic_write
from . import control_fields, cycle


def power_coef_table(results: Results) -> np.ndarray:
    """(S, C, P) every candidate's coefficients in plain units of its regressor (NaN-padded)."""
    from ..fit.basis import neg_powers
    out = np.full(results.coef.shape, np.nan)
    for _, cols in results.lineup.groups:  # a family's candidates share a window: its powers computed once
        mid = results.basis_mid[:, cols.start]
        powers = neg_powers(mid, int(results.lineup.complexity[cols].max()))
        for c in range(cols.start, cols.stop):
            size = results.candidates[c].complexity
            same = np.array_equal(results.basis_mid[:, c].view(np.int64), mid.view(np.int64))  # bit for bit
            out[:, c, :size] = results.family_of(c).plain(results.coef[:, c, :size], results.basis_mid[:, c],
                                                           results.basis_half[:, c], powers if same else None)
    if results.controls is not None:  # the price part with every control at 0 (``Results.power_coef``)
        out[:, :, 0] -= results.controls.shift
    return out


def header(results: Results, diagnosis=None, backtest=None) -> dict:
    settings = results.settings.as_dict()
    if diagnosis is not None:
        settings["thresholds"] = diagnosis.thresholds.as_dict()
    if results.controls is not None:
        settings["controls"] = control_fields.header_settings(results)
    return {"schema": SCHEMA, "settings": settings, "input": dict(results.data.source)} | cycle.header_extras(backtest)


def _flag_lists(results: Results, diagnosis) -> list[list[dict]]:
    if diagnosis is None:
        return [[] for _ in range(results.n_series)]
    any_flag = diagnosis.raised.any(axis=1)
    return [diagnosis.flags_of(s) if any_flag[s] else [] for s in range(results.n_series)]


def _flag_texts(results: Results, diagnosis):
    """(S,) Arrow text: each series' flags as the JSON ``json.dumps(flags_of(s), ensure_ascii=False)``
    writes ("[]" for none), assembled flag by flag over the series raising it, then joined column-wise in
    Arrow (no list, dict or JSON encoding a series)."""
    import pyarrow as pa
    import pyarrow.compute as pc

    from ..review.flags import CODES, SEVERITY
    from ..review.sentence_columns import flag_sentences
    n_s = results.n_series
    if diagnosis is None or not diagnosis.raised.any():
        return pa.array(np.full(n_s, "[]", dtype=object), pa.string())
    columns = []
    for i, code in enumerate(CODES):
        raised = np.flatnonzero(diagnosis.raised[:, i])
        if not len(raised):
            continue
        head = f', {{"code": {json.dumps(code)}, "severity": {json.dumps(SEVERITY[code])}, "message": '
        messages = _json_strings(flag_sentences(diagnosis, raised, code))
        texts = pa.concat_arrays([pc.binary_join_element_wise(head, messages, "}", ""), pa.array([""])])
        at = np.full(n_s, len(raised), dtype=np.int64)  # the empty text at the end, where it is not raised
        at[raised] = np.arange(len(raised))
        columns.append(texts.take(pa.array(at)))
    # Each flag's text leads with ", ": joined without a separator (null_handling="skip" loses rows in
    # pyarrow 26), then the first ", " dropped.
    joined = pc.utf8_slice_codeunits(pc.binary_join_element_wise(*columns, ""), 2)
    return pc.binary_join_element_wise("[", joined, "]", "")


def _json_strings(texts):
    """Arrow text: each of ``texts`` (Arrow text or a list) as ``json.dumps(text, ensure_ascii=False)``
    writes it, quoted and escaped column-wise (a text holding a control character goes through
    ``json.dumps`` itself)."""
    import pyarrow as pa
    import pyarrow.compute as pc
    array = texts if isinstance(texts, pa.Array) else pa.array(texts, pa.string())
    escaped = pc.replace_substring(pc.replace_substring(array, "\\", "\\\\"), '"', '\\"')
    quoted = pc.binary_join_element_wise('"', escaped, '"', "")
    control = pc.match_substring_regex(array, "[\\x00-\\x1f]").to_numpy(zero_copy_only=False)
    if not control.any():
        return quoted
    rare = np.flatnonzero(control)
    fixed = np.array(quoted.to_pylist(), dtype=object)
    fixed[rare] = [json.dumps(array[i].as_py(), ensure_ascii=False) for i in rare.tolist()]
    return pa.array(fixed, pa.string())


def _num(value) -> float | None:
    value = float(value)
    return value if math.isfinite(value) else None


def series_records(results: Results, diagnosis=None, backtest=None) -> list[dict]:
    """One JSON-ready dict per series (the ``series`` list of a results file)."""
    data, names = results.data, results.names
    coef = power_coef_table(results)
    fingerprints = data.fingerprints
    score = results.score
    flags = _flag_lists(results, diagnosis)
    smeared = [results.family_of(c).smeared for c in range(len(results.candidates))]
    cand_extras, series_extras = cycle.json_candidate_extras(results), cycle.json_series_extras(results, backtest)
    records = []
    for s in range(results.n_series):
        folds = results.folds_of(s)
        candidates = []
        for c, cand in enumerate(results.candidates):
            ok = bool(results.available[s, c])
            size = cand.complexity
            entry = {"name": cand.name, "family": cand.family, "degree": cand.degree, "available": ok,
                     "reason": results.reason_text(s, c),
                     "cv_mse": _num(results.cv_mse[s, c]) if ok else None,
                     "cv_se": _num(results.cv_se[s, c]) if ok else None,
                     "fold_mse": [_num(v) for v in folds[:, c]] if ok else [],
                     "r2": _num(results.r2[s, c]) if ok else None,
                     "q2": _num(results.q2[s, c]) if ok else None,
                     "coef": [_num(v) for v in coef[s, c, :size]] if ok else None}
            if smeared[c]:
                entry["smearing"] = _num(results.smear[s, c]) if ok else None
            if ok and math.isfinite(results.plan_price[s]):  # every candidate's numbers at the plan, as Parquet has
                entry["plan_volume"] = _num(results.plan_volume[s, c])
                entry["plan_lo"], entry["plan_hi"] = _num(results.plan_lo[s, c]), _num(results.plan_hi[s, c])
                entry["plan_elasticity"] = _num(results.plan_elasticity[s, c])
            if results.controls is not None:
                entry["controls"] = control_fields.candidate_controls(results.controls, s, c, ok)
            entry.update(cand_extras(s, c, ok))  # the next cycle's fields (results/cycle.py)
            candidates.append(entry)
        chosen = int(results.chosen[s])
        records.append({
            "key": data.key_of(s), "n": int(data.counts[s]),
            "price_range": [_num(results.price_lo[s]), _num(results.price_hi[s])],
            "candidates": candidates,
            "chosen": names[chosen] if chosen >= 0 else None,
            "rule": results.settings.rule,
            "score": _num(score[s]),
            "flags": flags[s],
            "revenue_price": _num(results.revenue_price[s]),
            "plan": _plan_record(results, s, chosen),
            "fingerprint": fingerprints[s],
        } | series_extras(s))  # the next cycle's fields (results/cycle.py)
        if results.controls is not None:
            records[-1].update(control_fields.series_controls(results.controls, s))
    return records


def _plan_record(results: Results, s: int, chosen: int) -> dict | None:
    price = results.plan_price[s]
    if not math.isfinite(price) or chosen < 0:
        return None
    return {"price": _num(price), "volume": _num(results.plan_volume[s, chosen]),
            "lo": _num(results.plan_lo[s, chosen]), "hi": _num(results.plan_hi[s, chosen]),
            "level": results.settings.level, "elasticity": _num(results.plan_elasticity[s, chosen]),
            "inside_range": bool(results.price_lo[s] <= price <= results.price_hi[s])}


def write_results(results: Results, path: str | Path, diagnosis=None, *, batch=None, backtest=None) -> Path:
    """Write ``results`` (and the flags of ``diagnosis``, the ``backtest`` against a ledger) as JSON or
    Parquet, by the file name's ending.

    ``batch``: an ``outputs.Batch`` to stage the file in (put in place with the batch's other files).
    """
    path = Path(path)
    write = (batch.add if batch is not None else atomic_write)
    if path.suffix.lower() == ".json":
        document = header(results, diagnosis, backtest) | {"series": series_records(results, diagnosis, backtest)}
        payload = json.dumps(document, ensure_ascii=False, allow_nan=False, indent=None, separators=(",", ":"))
        write(path, lambda handle: handle.write(payload.encode("utf-8")))
    elif is_parquet_name(path):
        table = results_table(results, diagnosis, backtest)
        write(path, lambda name: _write_parquet_named(table, name), by_name=True)
    else:
        raise DataError(f"expected the results file to end in .json or .parquet, got {path.name!r}", path=str(path))
    return path


def write_parquet(table, where) -> None:
    """Write a results table (``results_table``) to a path or an open binary file."""
    import pyarrow as pa
    import pyarrow.parquet as pq
    # Dictionary pages only for text: on numbers they cost half the write time and save nothing.  No
    # column statistics: no reader here uses them (a file is one row group up to 1M rows, nothing to
    # skip), and they cost 10% of the write.
    text = [field.name for field in table.schema
            if pa.types.is_dictionary(field.type) or pa.types.is_string(field.type)]
    pq.write_table(table, where, compression="snappy", use_dictionary=text, write_statistics=False)


def _write_parquet_named(table, name: str) -> None:
    """Write through pyarrow's own file (no Python call per write), opened as a local file by name (a
    path is never taken for a URI)."""
    import pyarrow as pa
    with pa.OSFile(name, "wb") as sink:
        write_parquet(table, sink)


def results_table(results: Results, diagnosis=None, backtest=None):
    """The Parquet layout: one row per series × candidate; the header in the schema metadata."""
    import pyarrow as pa
    n_s, n_c = results.available.shape
    data = results.data
    repeat = lambda a: np.repeat(np.asarray(a), n_c)  # noqa: E731
    tile = lambda a: np.tile(np.asarray(a), n_s)  # noqa: E731
    coef = power_coef_table(results)
    sizes = np.array([c.complexity for c in results.candidates])
    ok = results.available.ravel()
    lengths = np.where(ok, tile(sizes), 0)
    coef_lists = _cell_lists(coef, lengths)
    fold_lists = _ragged(results.fold_err, results.fold_start, ok)
    chosen = results.chosen
    per_series = np.repeat(np.arange(n_s, dtype=np.int32), n_c)

    def repeat_text(values):  # one dictionary entry per series, not one Python string per row
        words = values if isinstance(values, pa.Array) else pa.array(np.asarray(values, dtype=object), pa.string())
        return pa.DictionaryArray.from_arrays(per_series, words)

    columns = {name: repeat_text(data.keys[name]) for name in data.key_names}
    columns.update(
        n=repeat(data.counts), price_lo=repeat(results.price_lo), price_hi=repeat(results.price_hi),
        candidate=pa.DictionaryArray.from_arrays(tile(np.arange(n_c, dtype=np.int32)), pa.array(results.names)),
        family=pa.DictionaryArray.from_arrays(tile(np.arange(n_c, dtype=np.int32)),
                                              pa.array([c.family for c in results.candidates])),
        degree=pa.array(tile([c.degree if c.degree is not None else -1 for c in results.candidates]),
                        mask=tile([c.degree is None for c in results.candidates])),
        available=ok,
        reason=_reason_texts(results, ok),
        cv_mse=results.cv_mse.ravel(), cv_se=results.cv_se.ravel(), fold_mse=fold_lists,
        r2=results.r2.ravel(), q2=results.q2.ravel(), coef=coef_lists,
        window_coef=pa.FixedSizeListArray.from_arrays(  # for pricefold itself: triage opens results without a refit
            pa.array(np.where(ok[:, None], results.coef.reshape(n_s * n_c, -1), np.nan).ravel()), results.coef.shape[-1]),
        smearing=results.smear.ravel(),  # NaN (null) for families without smearing
        is_chosen=(np.arange(n_c)[None, :] == chosen[:, None]).ravel(),
        chosen=pa.DictionaryArray.from_arrays(  # null where no candidate is available
            pa.array(repeat(chosen).astype(np.int32), mask=repeat(chosen < 0)), pa.array(results.names)),
        score=repeat(results.score), revenue_price=repeat(results.revenue_price),
        plan_price=repeat(results.plan_price), plan_volume=results.plan_volume.ravel(),
        plan_lo=results.plan_lo.ravel(), plan_hi=results.plan_hi.ravel(),
        plan_elasticity=results.plan_elasticity.ravel(),
        flags=repeat_text(_flag_texts(results, diagnosis)),
        fingerprint=repeat_text(data.fingerprints),
    )
    if results.controls is not None:
        columns.update(control_fields.parquet_columns(results, repeat_text))
    columns.update(cycle.parquet_columns(results, backtest))  # the next cycle's fields (results/cycle.py)
    table = pa.table({name: pa.array(value, from_pandas=True) if not isinstance(value, pa.Array) else value
                      for name, value in columns.items()})
    meta = json.dumps(header(results, diagnosis, backtest) | {"key_columns": list(data.key_names)})
    return table.replace_schema_metadata({b"pricefold": meta.encode()})


def _reason_texts(results: Results, ok: np.ndarray):
    """Why each unavailable (series, candidate) cell is unavailable; null where available.  The sentence
    (``Results.reason_text``) depends only on the cell's reason, count, size and distinct prices: it is
    made once per different combination of those, then taken for every cell (no Python per cell)."""
    import pyarrow as pa
    n_c = results.available.shape[1]
    cells = np.flatnonzero(~ok)
    if not len(cells):
        return pa.nulls(len(ok), pa.string())
    series, cand = np.divmod(cells, n_c)
    kept = np.zeros(len(series), np.int64) if results.controls is None else np.asarray(results.controls.kept)[series]
    once, back = np.unique(series, return_inverse=True)
    facts = np.stack([results.reason.ravel()[cells].astype(np.int64), cand, results.data.counts[series], kept,
                      _distinct_prices(results.data, once)[back.ravel()]], axis=1)
    combos, firsts, which = np.unique(facts, axis=0, return_index=True, return_inverse=True)
    texts = pa.array([results.reason_text(int(series[i]), int(cand[i])) for i in firsts.tolist()], pa.string())
    at = np.full(len(ok), len(combos), dtype=np.int64)  # past the end: null where available
    at[cells] = which.ravel()
    return pa.concat_arrays([texts, pa.nulls(1, pa.string())]).take(pa.array(at))


def _distinct_prices(data, series: np.ndarray) -> np.ndarray:
    """How many different prices each of ``series`` has (as ``np.unique`` counts them), for all at once."""
    from ..review.intervals import rows_of
    counts = data.counts[series]
    rows = rows_of(data.offsets, series)
    owner = np.repeat(np.arange(len(series)), counts)
    order = np.lexsort((data.price[rows], owner))
    price, owner = data.price[rows][order], owner[order]
    new = np.ones(len(rows), dtype=bool)
    differs = (price[1:] != price[:-1]) & ~(np.isnan(price[1:]) & np.isnan(price[:-1]))  # NaNs: one, as np.unique
    new[1:] = (owner[1:] != owner[:-1]) | differs
    return np.bincount(owner[new], minlength=len(series))


def _cell_lists(values, lengths):
    """A list per (series, candidate) cell: the first ``lengths`` entries of ``values`` (S, C, P)."""
    import pyarrow as pa
    flat = values.reshape(len(lengths), -1)[np.arange(values.shape[-1])[None, :] < lengths[:, None]]
    return pa.ListArray.from_arrays(np.concatenate(([0], np.cumsum(lengths))).astype(np.int32),
                                    pa.array(flat, type=pa.float64()))


def _ragged(values, starts, keep):
    """A list per (series, candidate) cell: ``values[starts[s]:starts[s + 1], c]``, empty where not ``keep``."""
    import pyarrow as pa
    n_c = values.shape[1]
    folds = np.diff(starts)
    lengths = np.repeat(folds, n_c) * keep
    bounds = np.concatenate(([0], np.cumsum(lengths)))
    if len(folds) and folds[0] > 0 and (folds == folds[0]).all():  # the usual case: every series has as many folds
        f = int(folds[0])
        cells = values[starts[0]:starts[-1]].reshape(len(folds), f, n_c).transpose(0, 2, 1).reshape(-1, f)
        flat = cells[keep].ravel()
    else:
        cell = np.repeat(np.arange(len(lengths)), lengths)
        within = np.arange(bounds[-1]) - bounds[:-1][cell]
        flat = values.reshape(-1)[(starts[cell // n_c] + within) * n_c + cell % n_c]
    return pa.ListArray.from_arrays(bounds.astype(np.int32), pa.array(flat, type=pa.float64()))
