"""The Parquet layout of a results file (one row per series × candidate), built a run of whole series at a time.

``ResultsTable`` makes what is per series and costs Python or the rows (keys, fingerprints, the flags that quote
an observation, the controls' texts, last dates, the backtest) once, for every series, when made (the other
flags, from the fit's numbers alone, run by run as the slices are built: ``FlagTexts``); ``slices()`` then yields the
table a run of whole series at a time (``SLICE_ROWS`` rows or so), each the rows of ``whole()`` for those
series, so the writer (``write.py``) writes one slice as a row group while the next is built, and the
whole table never exists at once.  Every slice has the same schema, the header in its metadata.
"""
from __future__ import annotations

import json

import numpy as np

from .. import arrays
from ..arrays import from_numpy, integers, numbers, text
from ..errors import DataError
from ..fit.results import Results
from ..review.intervals import BLOCK
from . import control_fields, cycle
from .checks import header_metadata

# Rows a slice aims at (whole series, whole ``BLOCK``s of them: the covariances' blocks; at 7 candidates one
# block, 28,672 rows, ~7 MiB of columns).  Smaller slices, less in memory: the fit's peak at 2M rows 445 →
# 425 MiB from 90k rows a slice to 30k, CPU and the readers' time the same.
SLICE_ROWS = 30_000


def power_coef_table(results: Results, part: slice = slice(None)) -> np.ndarray:
    """(S, C, P) every candidate's coefficients in plain units of its regressor (NaN-padded), for the
    series ``part``."""
    from ..fit.basis import neg_powers
    coef, basis_mid, basis_half = results.coef[part], results.basis_mid[part], results.basis_half[part]
    out = np.full(coef.shape, np.nan)
    for _, cols in results.lineup.groups:  # a family's candidates share a window: its powers computed once
        mid = basis_mid[:, cols.start]
        powers = neg_powers(mid, int(results.lineup.complexity[cols].max()))
        for c in range(cols.start, cols.stop):
            size = results.candidates[c].complexity
            same = np.array_equal(basis_mid[:, c].view(np.int64), mid.view(np.int64))  # bit for bit
            out[:, c, :size] = results.family_of(c).plain(coef[:, c, :size], basis_mid[:, c],
                                                           basis_half[:, c], powers if same else None)
    if results.controls is not None:  # the price part with every control at 0 (``Results.power_coef``)
        out[:, :, 0] -= results.controls.shift[part]
    return out


def slice_bounds(n_s: int, n_c: int, series: int | None = None) -> list[tuple[int, int]]:
    """``(lo, hi)``: runs of ``series`` whole series each (by default whole ``BLOCK``s of them, about
    ``SLICE_ROWS`` rows); one empty run for no series."""
    step = series or BLOCK * max(1, round(SLICE_ROWS / max(n_c, 1) / BLOCK))
    return [(lo, min(lo + step, n_s)) for lo in range(0, n_s, step)] or [(0, 0)]


class ResultsTable:
    """The Parquet layout of ``results`` (with the flags of ``diagnosis``, the ``backtest``), built on demand.

    Holds ``results`` (and its rows: the reasons count distinct prices, the covariances sum over the
    rows) but not ``diagnosis`` or ``backtest``: what they give is made here, but for the flags made run by
    run (``FlagTexts``: the diagnosis' flags and numbers, beside ``results``)."""

    def __init__(self, results: Results, header: dict, diagnosis=None, backtest=None) -> None:
        """``header``: the file's header (``write.header``), kept in the schema metadata."""
        data = results.data
        self.metadata = header_metadata(header | {"key_columns": list(data.key_names)})
        texts = {name: _text(data.keys[name]) for name in data.key_names}
        prints = data.fingerprint_texts if hasattr(data, "fingerprint_texts") else data.fingerprints  # read back: Arrow
        texts["fingerprint"] = _text(prints)
        if results.controls is not None:
            texts.update(control_fields.series_texts(results))
        self.texts = texts  # name → (S,) Arrow text, each series' value
        self.cycle = cycle.series_values(results, backtest)
        self.names = arrays.texts(list(results.names))
        self.families = arrays.texts([c.family for c in results.candidates]).dictionary_encode()  # each family once
        self.results = _with_rows_needed(results)
        self.flags = FlagTexts(diagnosis, self.results)

    def whole(self):
        """The whole table at once."""
        return self.slice(0, self.results.n_series)

    def slices(self, series: int | None = None):
        """The table a run of whole series at a time (``slice_bounds``; each slice built when asked for)."""
        for lo, hi in slice_bounds(*self.results.available.shape, series):
            yield self.slice(lo, hi)

    def slice(self, lo: int, hi: int):
        """The rows of series ``lo``…``hi - 1``."""
        import pyarrow as pa
        results, part, m = self.results, slice(lo, hi), hi - lo
        n_c = results.available.shape[1]
        repeat = lambda a: np.repeat(np.asarray(a)[part], n_c)  # noqa: E731
        tile = lambda a: np.tile(np.asarray(a), m)  # noqa: E731
        sizes = np.array([c.complexity for c in results.candidates])
        ok = results.available[part].ravel()
        coef_lists = _cell_lists(power_coef_table(results, part), np.where(ok, tile(sizes), 0))
        fold_lists = _ragged(results.fold_err, results.fold_start[lo:hi + 1], ok)
        chosen = results.chosen[part]
        per_series = np.repeat(np.arange(m, dtype=np.int32), n_c)

        def repeat_text(words, distinct: bool = False):  # a dictionary of texts, not one Python string per row
            if distinct:  # a different text each series (or nearly): the series' texts are the dictionary
                return pa.DictionaryArray.from_arrays(from_numpy(per_series), words.slice(lo, m))
            return repeated_text(words.slice(lo, m), n_c)

        which = tile(np.arange(n_c, dtype=np.int32))
        sole = len(results.data.key_names) == 1  # a sole key column: a different key each series
        keys = {name: repeat_text(self.texts[name], sole) for name in results.data.key_names}  # the keys' texts
        columns = dict(
            n=repeat(results.data.counts),
            **({} if results.weight_0 is None else {"n_weight_0": repeat(results.weight_0)}),  # weighted fits
            price_lo=repeat(results.price_lo), price_hi=repeat(results.price_hi),
            candidate=pa.DictionaryArray.from_arrays(from_numpy(which), self.names),
            family=pa.DictionaryArray.from_arrays(from_numpy(tile(numbers(self.families.indices))),
                                                  self.families.dictionary),
            degree=from_numpy(tile([c.degree if c.degree is not None else -1 for c in results.candidates]),
                              mask=tile([c.degree is None for c in results.candidates])),
            available=ok,
            reason=_reason_texts(results, ok, lo),
            cv_mse=results.cv_mse[part].ravel(), cv_se=results.cv_se[part].ravel(), fold_mse=fold_lists,
            r2=results.r2[part].ravel(), q2=results.q2[part].ravel(), coef=coef_lists,
            window_coef=pa.FixedSizeListArray.from_arrays(  # for pricefold itself: triage opens results without a refit
                from_numpy(np.where(ok[:, None], results.coef[part].reshape(m * n_c, -1), np.nan).ravel()),
                results.coef.shape[-1]),
            smearing=results.smear[part].ravel(),  # NaN (null) for families without smearing
            is_chosen=(np.arange(n_c)[None, :] == chosen[:, None]).ravel(),
            chosen=pa.DictionaryArray.from_arrays(  # null where no candidate is available
                from_numpy(np.repeat(chosen, n_c).astype(np.int32), mask=np.repeat(chosen < 0, n_c)), self.names),
            score=repeat(results.score), revenue_price=repeat(results.revenue_price),
            plan_price=repeat(results.plan_price), plan_volume=results.plan_volume[part].ravel(),
            plan_lo=results.plan_lo[part].ravel(), plan_hi=results.plan_hi[part].ravel(),
            plan_elasticity=results.plan_elasticity[part].ravel(),
            flags=repeated_text(self.flags.of(lo, hi), n_c),
            fingerprint=repeat_text(self.texts["fingerprint"], True),  # the same only for the same rows
        )
        if results.controls is not None:
            columns.update(control_fields.parquet_columns(results, lo, hi, repeat_text, self.texts))
        columns.update(cycle.parquet_columns(results, lo, hi, self.cycle))  # the next cycle's fields
        clash = [name for name in keys if name in columns]
        if clash:  # the results' own column would silently replace the key (every series of a product one key)
            raise DataError(f"{results.data.source.get('path', 'the data')}: column '{clash[0]}' is a key (product "
                            "or segment) and also a column of pricefold's Parquet results; expected key columns "
                            f"named otherwise: rename it in the data, or write the results as JSON (-o NAME.json)")
        table = pa.table({name: from_numpy(value, nan_is_null=True) if not isinstance(value, pa.Array) else value
                          for name, value in (keys | columns).items()})
        return table.replace_schema_metadata(self.metadata)


def repeated_text(words, n_c: int):
    """Arrow text ``words`` (one a series) each on its series' ``n_c`` rows, dictionary-encoded with every
    different text once in the dictionary (in order of first appearance: as pyarrow reads such a column back).

    Not a dictionary entry per series: Parquet's writer keeps a dictionary only if no text is in it twice, and
    otherwise writes every row's text in full (the flags at 100k series: 50 MB of text for 700k rows, then
    compressed again; the families, a key column of several likewise)."""
    import pyarrow as pa
    encoded = words.dictionary_encode()  # a null text: a null row
    index = numbers(encoded.indices)  # (NaN where null)
    missing = np.isnan(index) if encoded.indices.null_count else None
    index = (index if missing is None else np.where(missing, 0, index)).astype(np.int32)
    return pa.DictionaryArray.from_arrays(
        from_numpy(np.repeat(index, n_c), mask=None if missing is None else np.repeat(missing, n_c)),
        encoded.dictionary)


# Series whose flags are made at once (``FlagTexts.of``): at 7M rows in runs of one slice (4,096 series) the
# column-wise sentences cost 0.30 s, in runs of 16,384 0.23 s, all at once 0.21 s.
FLAG_RUN = 4 * BLOCK


class FlagTexts:
    """Each series' flags as the JSON ``json.dumps(flags_of(s), ensure_ascii=False)`` writes ("[]" for none),
    for a run of series at a time (``of``): assembled flag by flag over the series raising it, then joined
    column-wise in Arrow (no list, dict or JSON encoding a series).

    The sentences written column-wise from the fit's numbers (near ties, weak fits: 95% of flags at 100k
    series) are made run by run, as the slices are built: the write of one slice overlaps the next one's
    sentences, where made for all series first they held the write back (7M rows: 0.15–0.2 s).  The rare
    others, some of which quote an observation's row (its volume, line, date: rows ``ResultsTable`` does not
    keep), are made for every series when this is made.  ``results``: the fit the run-by-run sentences read
    (``_with_rows_needed``'s, in place of the diagnosis' own)."""

    def __init__(self, diagnosis, results: Results) -> None:
        from dataclasses import replace

        from ..review.flags import CODES, SEVERITY
        from ..review.sentence_columns import _MANY as COLUMN_WISE  # the sentences made column-wise
        self.n_series = results.n_series
        self._run = (0, None)  # the series made last: (the first, their texts)
        self.raised = None if diagnosis is None or not diagnosis.raised.any() else diagnosis.raised
        if self.raised is None:
            return
        self.diagnosis = replace(diagnosis, results=results)
        self.heads = [text(f', {{"code": {json.dumps(code)}, "severity": {json.dumps(SEVERITY[code])}, "message": ')
                      for code in CODES]
        self.codes = CODES
        self.made = {}  # code → (its texts for every series raising it, then ""; each series' place in them)
        for i, code in enumerate(CODES):
            raised = np.flatnonzero(self.raised[:, i])
            if len(raised) and code not in COLUMN_WISE:
                self.made[code] = self._pieces(i, self._sentences(diagnosis, raised, code), raised, self.n_series)

    @staticmethod
    def _sentences(diagnosis, series: np.ndarray, code: str):
        from ..review.sentence_columns import flag_sentences
        return _json_strings(flag_sentences(diagnosis, series, code))

    def _pieces(self, i: int, messages, raised: np.ndarray, n: int):
        """(texts, at): flag ``i``'s JSON for each of the ``raised`` of ``n`` series, then ""; each series'
        place among them (the "" where it is not raised)."""
        import pyarrow as pa
        import pyarrow.compute as pc
        texts = pa.concat_arrays([pc.binary_join_element_wise(self.heads[i], messages, text("}"), text("")),
                                  arrays.texts([""])])
        at = np.full(n, len(raised), dtype=np.int64)
        at[raised] = np.arange(len(raised))
        return texts, at

    def of(self, lo: int, hi: int):
        """(hi - lo,) Arrow text: the flags of series ``lo``…``hi - 1``, made ``FLAG_RUN`` series at a time or
        more (asked for slice after slice, a run serves the next slices too)."""
        start, texts = self._run
        if texts is None or not start <= lo <= hi <= start + len(texts):
            start, texts = self._run = lo, self._of(lo, min(max(hi, lo + FLAG_RUN), self.n_series))
        return texts.slice(lo - start, hi - lo)

    def _of(self, lo: int, hi: int):
        import pyarrow.compute as pc
        m = hi - lo
        if self.raised is None:
            return arrays.repeated("[]", m)
        columns = []
        for i, code in enumerate(self.codes):
            raised = np.flatnonzero(self.raised[lo:hi, i])
            if not len(raised):
                continue
            if code in self.made:
                texts, at = self.made[code]
                at = at[lo:hi]
            else:
                texts, at = self._pieces(i, self._sentences(self.diagnosis, lo + raised, code), raised, m)
            columns.append(texts.take(integers(at)))
        if not columns:
            return arrays.repeated("[]", m)
        # Each flag's text leads with ", ": joined without a separator (null_handling="skip" loses rows in
        # pyarrow 26), then the first ", " dropped.
        joined = pc.utf8_slice_codeunits(pc.binary_join_element_wise(*columns, text("")), 2)
        return pc.binary_join_element_wise(text("["), joined, text("]"), text(""))


def _json_strings(texts):
    """Arrow text: each of ``texts`` (Arrow text or a list) as ``json.dumps(text, ensure_ascii=False)``
    writes it, quoted and escaped column-wise (a text holding a control character goes through
    ``json.dumps`` itself)."""
    import pyarrow as pa
    import pyarrow.compute as pc
    array = texts if isinstance(texts, pa.Array) else arrays.texts(texts)
    escaped = pc.replace_substring(pc.replace_substring(array, "\\", "\\\\"), '"', '\\"')
    quoted = pc.binary_join_element_wise(text('"'), escaped, text('"'), text(""))
    control = numbers(pc.match_substring_regex(array, "[\\x00-\\x1f]")) == 1  # (a null text: NaN, False)
    if not control.any():
        return quoted
    rare = np.flatnonzero(control)
    fixed = np.array(quoted.to_pylist(), dtype=object)
    fixed[rare] = [json.dumps(array[i].as_py(), ensure_ascii=False) for i in rare.tolist()]
    return arrays.texts(fixed)


def _with_rows_needed(results: Results) -> Results:
    """``results`` with only the rows the slices still read (prices, weights, and with controls their values
    and the dates, for the covariances; volumes and line numbers are in the texts and values made already): a
    caller that drops its own ``results`` and dataset frees the rest before the table is built (7M rows:
    112 MiB of volumes and line numbers)."""
    from dataclasses import replace
    data = results.data
    if not data.n_rows:
        return results
    if results.controls is not None:
        return replace(results, data=replace(data, volume=data.volume[:0], line=None))
    return replace(results, data=replace(data, volume=data.volume[:0], date=None, line=None, controls={}))


def _text(values):
    """(S,) Arrow text of a key column or the fingerprints (already Arrow text: as it is)."""
    import pyarrow as pa
    return values if isinstance(values, pa.Array) else arrays.texts(np.asarray(values, dtype=object))


def _reason_texts(results: Results, ok: np.ndarray, lo: int):
    """Why each unavailable (series, candidate) cell of the series from ``lo`` on (``ok``: their cells) is
    unavailable; null where available.  The sentence (``Results.reason_text``) depends only on the cell's
    reason, count, size and distinct prices: it is made once per different combination of those, then
    taken for every cell (no Python per cell)."""
    import pyarrow as pa
    n_c = results.available.shape[1]
    cells = np.flatnonzero(~ok)
    if not len(cells):
        return pa.nulls(len(ok), pa.string())
    series, cand = np.divmod(cells, n_c)
    series += lo
    kept = np.zeros(len(series), np.int64) if results.controls is None else np.asarray(results.controls.kept)[series]
    once, back = np.unique(series, return_inverse=True)
    facts = np.stack([results.reason[series, cand].astype(np.int64), cand, results.data.counts[series], kept,
                      _distinct_prices(results.data, once)[back.ravel()]], axis=1)
    combos, firsts, which = np.unique(facts, axis=0, return_index=True, return_inverse=True)
    texts = arrays.texts([results.reason_text(int(series[i]), int(cand[i])) for i in firsts.tolist()])
    at = np.full(len(ok), len(combos), dtype=np.int64)  # past the end: null where available
    at[cells] = which.ravel()
    return pa.concat_arrays([texts, pa.nulls(1, pa.string())]).take(integers(at))


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
    return pa.ListArray.from_arrays(from_numpy(np.concatenate(([0], np.cumsum(lengths))).astype(np.int32)),
                                    from_numpy(flat.astype(np.float64, copy=False)))


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
    return pa.ListArray.from_arrays(from_numpy(bounds.astype(np.int32)), from_numpy(flat.astype(np.float64, copy=False)))
