"""``pricefold ledger export``: the decision standing on each series, as CSV for planning systems.

Text cells that a spreadsheet would run as a formula (starting with ``=``, ``+``, ``-``, ``@``,
a tab or a carriage return — the common CSV-injection guidance) get a leading ``'`` unless
``--raw``; numbers are never touched.  Every row carries the ledger's head (``ledger_head``,
``SEQ:DIGEST``) so the planning side keeps a witness of the ledger it was exported from.

A row whose standing decision carries a ``signed`` snapshot writes what was signed: signed on other data
(``stale``), the snapshot's numbers; signed on these data, the snapshot's curve once the results' candidate
agrees with it (``disagreement``; else the whole export is refused in one line, ``refusal``), at this
results' plan price (``_signed_at_price`` where it is another price).  Other rows take the results' numbers.

``flags`` holds the results' codes, which judge the proposal; a row standing on another candidate (not
``stale``) has that candidate's own shape and range checks instead, as the override dialog shows them
(``candidate_checks.standing_codes``, as ``show --ledger`` and the report: the screen's ``curve_checks``), and
none of the codes of the proposal's fit alone.  Parquet results give those few candidates' curves from the row
groups holding them (``_with_basis``), so an export with no override reads nothing more.
"""
from __future__ import annotations

import csv
import io
import json
import math
import os
import sys
from collections.abc import Iterator
from functools import lru_cache
from pathlib import Path

from fitcore import ledger
from fitcore.errors import DataError
from fitcore.ledger.replay import series_id
from fitcore.ledger.rules import decided_on_newer
from fitcore.text import clean

from .ledger_cli import meets, open_ledger, refuse_key_mismatch, say_missing, say_unchecked

RISKY = ("=", "+", "-", "@", "\t", "\r")
RISKY_FIRST = frozenset(RISKY)  # one character each: ``text[:1] in RISKY_FIRST`` is ``text.startswith(RISKY)``


def inert(cells: list) -> list:
    """A row's text cells made inert for spreadsheets: a leading ``'`` where one starts like a formula (numbers
    are written as they are).  One comprehension a row: a call a cell was a third of an export's time."""
    return ["'" + cell if isinstance(cell, str) and cell[:1] in RISKY_FIRST else cell for cell in cells]


def run_export(args) -> int:
    from fitcore.results.read import read_header, results_in_parts
    from fitcore.results.series_columns import is_columnar
    ahead = None
    if is_columnar(args.results):  # column by column: only the exported candidate's cells of each series
        header, parts = read_header(args.results), None
        header.pop("key_columns", None)
        ahead = _columns_ahead(args.results)  # while the ledger is read and verified
    else:
        header, parts = results_in_parts(args.results)
    book = open_ledger(args.ledger, refuse=(ledger.BROKEN,), must_exist=True)
    refuse_key_mismatch(args.results, header, book, args.ledger)  # else every row "pending", matching nothing
    from fitcore.ledger.elsewhere import backtested_elsewhere, head_gone
    gone = head_gone(args.results, header, book.records, args.ledger)
    if gone:  # an older copy restored, or its end cut: its rows would hand planning decisions that are gone
        raise ledger.LedgerError(f"{gone}; nothing was written (fit again with --ledger to export from it as it is)")
    foreign = backtested_elsewhere(args.results, header, args.ledger)
    if foreign:  # as show --ledger, carry and the screen: its shifted flags speak of another ledger's signers
        print(f"pricefold ledger: {foreign}; its 'shifted' flags are left out of the export (fit again with --ledger "
              "on this ledger)", file=sys.stderr)
    from fitcore.outputs import check_outputs
    from fitcore.results.read import results_inputs
    to_stdout = str(args.output) == "-"  # for a pipe (``| head``): no file (it wrote one named '-'; a trial)
    if not to_stdout:
        check_outputs([(args.output, "export")], [("the ledger", args.ledger), ("the results", args.results),
                                                  *results_inputs(header)])
    buffer = io.StringIO()
    # RFC 4180 line ends: with "\r\n" as the terminator the writer also quotes a cell holding a lone
    # carriage return (with "\n" alone, Python 3.11 wrote it bare and the row split in two).
    writer = csv.writer(buffer, lineterminator="\r\n")
    made = (lambda cells: cells) if args.raw else inert
    columns = header.get("settings", {}).get("columns") or {"product": "product", "segments": []}
    keys = key_headers([columns["product"], *columns.get("segments", [])])
    renamed = [f"'{clean(old)}' written as '{clean(new)}'" for old, new in keys.items() if old != new]
    if renamed:  # said even with --quiet: a script reading the old name should hear it
        print(f"pricefold ledger: {args.output}: key column {', '.join(renamed)} (the export has its own column "
              "of that name)", file=sys.stderr)
    writer.writerow(made([*keys.values(), *COLUMNS]))
    count, keys, head, newer = 0, [], book.head_text, 0
    own = {"volume": "plan_volume", "lo": "plan_lo", "hi": "plan_hi", "elasticity": "plan_elasticity"}
    level = (header.get("settings") or {}).get("level")
    rows: list[list] = []
    unmeasured: list[int] = []  # rows whose elasticity nothing measured (price never varied, or a flat curve)
    later: list[tuple] = []  # (row, key, snapshot, price, the results' numbers): signed curves at another price
    from fitcore.collector import collector_paused
    from fitcore.ledger.snapshot import signed_plan
    from fitcore.review.candidate_checks import standing_codes
    from fitcore.review.thresholds import recorded_thresholds
    thresholds = lru_cache(lambda: recorded_thresholds((header.get("settings") or {}).get("thresholds"),
                                                       args.results))  # the fit's, as the screen judges by
    unchecked = 0  # rows of another candidate than the proposal whose curve the results do not hold
    with collector_paused():  # a few small objects a series and no cycles among them
        series = _by_columns(ahead, book) if parts is None else _by_records(parts, book)
        for key, fingerprint, chosen, plan, history, cand, last_date, seen in series:
            count += 1
            keys.append(key)
            status = history.status(fingerprint) if history else "pending"
            if foreign and "shifted" in seen.codes:
                seen = Seen(seen.lo, seen.hi, [code for code in seen.codes if code != "shifted"])
            if status == "stale" and decided_on_newer(key, fingerprint, last_date, history):
                newer += 1
            current = history.current if history else None
            model = current["model"] if current else chosen
            # The standing model's plan numbers: the proposal's from the plan; another candidate's from its own
            # fields where the results hold them (its interval only where they do).
            at_plan = plan if model == chosen else {k: (cand or {}).get(v) for k, v in own.items()}
            family, coef = (cand["family"] if cand else ""), (coef_text(cand["coef"]) if cand and cand["coef"] else "")
            # Duan's smearing of a log family (absent or null for the others): only beside the coefficients it scales
            smearing = cand.get("smearing") if coef else None
            snapshot = (current.get("signed") or None) if current else None
            varied = seen.varied
            if status == "stale":  # signed on other data: the signed model's numbers, never this fit's
                family, coef, at_plan, smearing = signed_columns(current)
                plan = {"price": at_plan.get("price")}
                half = ((snapshot or {}).get("basis") or {}).get("half")
                varied = half is None or half > 0  # the data it was signed on: a window of no width, one price
            elif snapshot:  # signed on these data: the curve as signed, once the results agree with it
                said = disagreement(cand, plan.get("price"), at_plan, snapshot, level)
                if said:
                    raise refusal(args.results, key, *said)
                family, coef, _, smearing = signed_columns(current)
                signed = signed_plan(snapshot)
                if plan.get("price") is None:
                    at_plan = {}
                elif signed.get("price") == plan["price"]:
                    at_plan = signed
                else:  # the same data planned at another price: the signed curve there (filled in below; a
                    # snapshot without its curve's basis cannot say: the plan numbers stay empty)
                    if (snapshot.get("basis") or {}).get("coef"):
                        later.append((len(rows), key, snapshot, plan["price"], at_plan))
                    at_plan = {}
            if status != "stale" and model and model != chosen:  # another candidate stands: its own flags
                codes, checked = standing_codes(seen.codes, cand, snapshot, plan.get("price"), seen.lo, seen.hi,
                                                thresholds())
                unchecked += not checked
                seen = Seen(seen.lo, seen.hi, codes)
            rows.append([*map(str, key.values()), status, model or "", family, coef, _number(smearing),
                         current["analyst"] if current else "", current["at"] if current else "",
                         current.get("note", "") if current else "", _number(plan.get("price")),
                         *plan_cells(at_plan), carried_from(history), *carried_decision(history), head,
                         *seen.cells(plan.get("price") if status != "stale" else None)])
            # a flat curve's 0 is the model's choice (the folds found no price effect worth its coefficient), not
            # a measurement: the screen says so beside it, and a bare 0 read downstream as "volume does not respond"
            if not varied or model == "poly0":
                unmeasured.append(len(rows) - 1)
    said, found = meets(keys, book, args.ledger) if book.histories else (None, None)
    if said:  # a warning, not a refusal: a team ledger may hold other product ranges keyed alike
        tail = "every row is pending" if found.new == count else "their rows are pending, beside the ledger's own"
        print(f"pricefold ledger: {args.results}: warning: {said}; {tail}", file=sys.stderr)
    say_missing("pricefold ledger", args.results, keys, book, args.ledger)  # no row for those
    if newer:  # results older than the decisions: their rows say "stale", which reads as decided on older data
        print(f"pricefold ledger: {args.results}: warning: {newer:,} series were decided on newer data than these "
              "results: their rows say 'stale' and hold the signed numbers; export from the newer results",
              file=sys.stderr)
    say_unchecked("pricefold ledger", args.results, unchecked)
    if later:
        _signed_at_price(args.results, rows, later, level)
    at = len(keys[0]) + COLUMNS.index("plan_elasticity") if keys else 0
    for row in unmeasured:  # a 0 that measures nothing (README: "not estimable")
        rows[row][at] = ""
    for row in rows:
        writer.writerow(made(row))
    if to_stdout:
        payload = buffer.getvalue().encode("utf-8")
        try:
            sys.stdout.flush()
            try:  # closed by the shell (``>&-``): its descriptor is the null device, its writes fail (exit 74)
                fd = -1 if getattr(sys.stdout, "closed_by_shell", False) else sys.stdout.fileno()
            except (AttributeError, OSError, ValueError):  # (io.UnsupportedOperation: a stream with no descriptor)
                fd = -1
            if fd < 0:
                sys.stdout.write(payload.decode("utf-8"))
            else:
                left = memoryview(payload)
                while left:  # each short write seen (through Python's buffered file a reader gone mid-write was not)
                    left = left[os.write(fd, left[:1 << 20]):]
        except BrokenPipeError:  # the reader went away: a planning system got part of the file, if any (a trial)
            os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())  # nothing more to flush there at exit
            print(f"pricefold ledger: the reader of standard output went away before the export was whole "
                  f"({len(payload):,} bytes, {count:,} series): not every row reached it", file=sys.stderr)
            return os.EX_IOERR  # 74, as cli.IO_FAILED (not imported: the command line imports this module)
    else:
        write_text(args.output, buffer.getvalue())
    if not args.quiet:
        print(f"{count:,} series written to {'standard output' if to_stdout else args.output} (ledger head {head})",
              file=sys.stderr)
    return 0


# The export's own columns, after the key columns.  Format 2 added the last two (after ``ledger_head``, so a
# reader of format 1 by position still finds every column where it was).
COLUMNS = ("status", "model", "family", "coef", "smearing", "analyst", "at", "note", "plan_price", "plan_volume",
           "plan_lo", "plan_hi", "plan_elasticity", "carried_from", "carried_analyst", "carried_at", "carried_note",
           "ledger_head", "inside_range", "flags")
EXPORT_FORMAT = 2


class Seen:
    """What the results say of a series beside its numbers: its observed prices (``lo``, ``hi``: None where
    unknown) and its flags' codes."""

    __slots__ = ("lo", "hi", "codes")

    def __init__(self, lo, hi, codes: list[str]):
        self.lo, self.hi, self.codes = lo, hi, codes

    @property
    def varied(self) -> bool:
        """Whether price varied in the series (else its elasticity measures nothing)."""
        return self.lo is None or self.hi is None or self.hi > self.lo

    def cells(self, price) -> list:
        """``inside_range`` and ``flags``: ``true`` where the row's plan price lies within the series' observed
        prices and no control's plan value lies outside the values the series has seen (no ``outside-range``),
        ``false`` where either does (an extrapolation, or a control's effect missing: ``flags`` says which), empty
        without a plan price here (a stale row's numbers are of other data); the flag codes, space-separated."""
        if price is None or self.lo is None:
            inside = ""
        else:
            inside = "true" if self.lo <= price <= self.hi and "outside-range" not in self.codes else "false"
        return [inside, " ".join(self.codes)]


def seen_in(record: dict) -> Seen:
    lo, hi = record.get("price_range") or (None, None)
    return Seen(lo, hi, [f["code"] for f in record.get("flags") or []])


def key_headers(names: list[str]) -> dict[str, str]:
    """Each key column's header: its own name, or ``key_NAME`` where an export column has the name (a segment
    called ``family`` or ``note``), ``key_`` again until no other header has it, so every header is one column."""
    taken = set(COLUMNS) | set(names)
    out = {}
    for name in names:
        header = name
        if name in COLUMNS:
            while header in taken:
                header = "key_" + header
            taken.add(header)
        out[name] = header
    return out


def model_of(history, chosen: str | None) -> str | None:
    """The model a series' standing decision names (its ledger ``history``), or the proposal where none stands."""
    current = history.current if history else None
    return current["model"] if current else chosen


# (key, fingerprint, chosen, plan: price, volume, lo, hi or {}, ledger history or None, the fields of the
# candidate it exports or None, the series' last date, its ``Seen``)
Exported = tuple[dict, str, str, dict, object, dict, "str | None", Seen]


def _by_records(parts, book) -> Iterator[Exported]:
    """What is exported of each series, from records (a JSON results file)."""
    for record in (record for series in parts for record in series):
        history = book.histories.get(series_id(record["key"]))
        model = model_of(history, record["chosen"])
        cand = next((c for c in record["candidates"] if c["name"] == model), None)
        yield (record["key"], record["fingerprint"], record["chosen"], record.get("plan") or {}, history, cand,
               record.get("last_date"), seen_in(record))


# The columns read for an export, and the Arrow type each must have for the column reader to vouch for
# it (what pricefold writes); a part with another type goes through the record reader, which names the
# problem as it always did.
EXPORTED = {"chosen": "text", "fingerprint": "text", "is_chosen": "bool", "plan_price": "number",
            "plan_volume": "number", "plan_lo": "number", "plan_hi": "number", "available": "bool",
            "plan_elasticity": "number", "family": "text", "coef": "numbers", "smearing": "number",
            "price_lo": "number", "price_hi": "number", "flags": "text"}


def _columns_ahead(path: Path) -> tuple[list[Path], object]:
    """The parts of a Parquet results file or folder, and the first one's ``EXPORTED`` columns being read in
    a thread (a future: its ``result()`` raises what the read raised).  Arrow reads without the interpreter's
    lock, so the read costs no time beside the ledger's verification; the other parts are read in turn, one
    part's columns in memory at a time."""
    from concurrent.futures import ThreadPoolExecutor

    from fitcore.results.read import result_parts
    parts = result_parts(path) or [Path(path)]
    pool = ThreadPoolExecutor(1)
    first = pool.submit(_export_columns, parts[0])
    pool.shutdown(wait=False)
    return parts, first


def _export_columns(part: Path):
    import pyarrow.parquet as pq

    from fitcore.results.read import read_header
    from fitcore.results.series_columns import series_columns
    dated = ["last_date"] if "last_date" in pq.read_schema(part).names else []  # results made before it: none
    return series_columns(part, read_header(part), [*EXPORTED, *dated])


def _by_columns(ahead: tuple[list[Path], object], book) -> Iterator[Exported]:
    """What is exported of each series of a Parquet results file or folder (``_columns_ahead``), column by
    column: per series its key, fingerprint and proposal, the plan numbers of its chosen row, and the cells
    of one candidate's row — the model it exports (the standing decision's, else the proposal)."""
    import numpy as np
    import orjson

    from fitcore.arrays import numbers
    from fitcore.results.read import results_in_parts
    from fitcore.results.series_columns import check_fields
    parts, first = ahead
    for i, part in enumerate(parts):
        columns = first.result() if i == 0 else _export_columns(part)
        if not all(_typed(columns.table.schema.field(name).type, kind) for name, kind in
                   [*((name, "text") for name in columns.key_names), *EXPORTED.items()]):
            yield from _by_records(results_in_parts(part)[1], book)
            continue
        every = np.arange(columns.n_series)
        key_values = [columns.values(name, 0, every) for name in columns.key_names]
        keys = [dict(zip(columns.key_names, values)) for values in zip(*key_values)]
        fields = {name: columns.values(name, 0, every) for name in ("chosen", "fingerprint")}
        check_fields(part, columns, every, fields, key_values, keys)
        chosen = fields["chosen"]
        histories = [book.histories.get(series_id(key)) for key in keys]
        models = [model_of(history, proposal) for history, proposal in zip(histories, chosen)]
        place = {name: c for c, name in enumerate(columns.candidates)}
        at = np.array([place.get(model, -1) for model in models], dtype=np.int64)
        cands: list[dict | None] = [None] * len(keys)
        found = np.flatnonzero(at >= 0)
        if found.size:
            cells = {name: columns.values(name, at[found], found) for name in
                     ("family", "coef", "smearing", "available", "plan_price", "plan_volume", "plan_lo",
                      "plan_hi", "plan_elasticity")}
            for j, s in enumerate(found.tolist()):
                priced = cells["plan_price"][j] is not None and cells["available"][j]  # as the record reader
                cands[s] = {"family": cells["family"][j], "coef": cells["coef"][j], "smearing": cells["smearing"][j],
                            **({name: cells[name][j] for name in PLAN_FIELDS} if priced else {})}
        ranges = [columns.values(name, 0, every) for name in ("price_lo", "price_hi")]
        another = [s for s in found.tolist() if models[s] != chosen[s] and cands[s]["coef"]]
        if another:  # their curves checked as the screen checks them (``standing_codes``): in their basis
            _with_basis(part, columns, another, at, cands, ranges)
        # the plan: from the last row of a series marked chosen that has a plan price (as the record reader)
        marked = (numbers(columns.table.column("is_chosen").combine_chunks()) == 1) & \
            _valid(columns.table.column("plan_price"))
        marked = marked.reshape(columns.n_series, len(columns.candidates))
        last = marked.shape[1] - 1 - np.argmax(marked[:, ::-1], axis=1)
        planned = np.flatnonzero(marked.any(axis=1))
        plans: list[dict] = [{}] * len(keys)
        if planned.size:
            numbers_at = {name: columns.values(name, last[planned], planned) for name in ("plan_price", *PLAN_FIELDS)}
            for j, s in enumerate(planned.tolist()):
                plans[s] = {"price": numbers_at["plan_price"][j], "volume": numbers_at["plan_volume"][j],
                            "lo": numbers_at["plan_lo"][j], "hi": numbers_at["plan_hi"][j],
                            "elasticity": numbers_at["plan_elasticity"][j]}
        days = [None if day is None else day.isoformat() for day in columns.values("last_date", 0, every)] \
            if "last_date" in columns.table.column_names else [None] * len(keys)
        seen = [Seen(lo, hi, [f["code"] for f in orjson.loads(flags or "[]")])
                for lo, hi, flags in zip(*ranges, columns.values("flags", 0, every))]
        yield from zip(keys, fields["fingerprint"], chosen, plans, histories, cands, days, seen)


PLAN_FIELDS = ("plan_volume", "plan_lo", "plan_hi", "plan_elasticity")


def _with_basis(part: Path, columns, series: list[int], at, cands: list, ranges: list) -> None:
    """Give the exported candidate of each of ``series`` (indices into the part) its curve in its basis, as a
    JSON results file holds it (``basis``): its window coefficients read from the row groups that hold them (a
    few series: per-override work, not a column of every series).  Read apart from the other columns: a file
    put in its place meanwhile (its plain ``coef`` no longer the ones read) is refused in one line."""
    import numpy as np

    from fitcore.results.read import row_basis
    from fitcore.results.series_columns import cells_at
    rows = columns.rows(at[series], series)
    cells = cells_at(part, rows, ("coef", "window_coef"))
    for s, plain, coef in zip(series, cells.column("coef").to_pylist(), cells.column("window_coef").to_pylist()):
        cand = cands[s]
        if not np.array_equal(np.array(plain, float), np.array(cand["coef"], float), equal_nan=True):
            raise DataError("changed while it was read (another fit writing it?); nothing was written, export "
                            "again", path=str(part))
        cand["basis"] = row_basis(cand["family"], ranges[0][s], ranges[1][s], coef[:len(plain)])


def _typed(kind, expected: str) -> bool:
    import pyarrow as pa
    if pa.types.is_dictionary(kind):
        kind = kind.value_type
    if expected == "numbers":
        return pa.types.is_list(kind) and pa.types.is_floating(kind.value_type)
    return {"text": lambda k: pa.types.is_string(k) or pa.types.is_large_string(k), "bool": pa.types.is_boolean,
            "number": pa.types.is_floating}[expected](kind)


def _valid(column):
    """(rows,) whether each cell of an Arrow column holds a value."""
    import numpy as np
    array = column.combine_chunks()
    if not array.null_count:
        return np.ones(len(array), dtype=bool)
    return np.unpackbits(np.frombuffer(array.buffers()[0], np.uint8), bitorder="little")[
        array.offset:array.offset + len(array)].astype(bool)


def signed_columns(decision: dict) -> tuple[str, str, dict, float | None]:
    """``(family, coef, plan, smearing)`` of a decision standing on other data, from its ``signed`` snapshot
    (plan: price, volume, lo, hi as signed; smearing: Duan's factor of a log family, else None); empty when it
    has none (a ``/1`` record, a hold)."""
    from fitcore.ledger.snapshot import signed_plan
    snapshot = decision.get("signed") or {}
    if not snapshot:
        return "", "", {}, None
    coef = json.dumps(snapshot["coef"]) if snapshot.get("coef") else ""
    return snapshot.get("family") or "", coef, signed_plan(snapshot), snapshot.get("smearing") if coef else None


# How closely the results must agree with a decision's ``signed`` snapshot when both are of the same data: the
# two are the same numbers (JSON and Parquet hold floats exactly), computed by the same code or by its batch
# twin (the snapshot's plan numbers are evaluated from its basis), so a few ulps at most.
AGREE = 1e-9


def _agree(results, signed) -> bool:
    """Whether a results' number and a signed one are the same (both missing, or within ``AGREE``)."""
    if results is None or signed is None:
        return results is None and signed is None
    a, b = float(results), float(signed)
    return a == b or abs(a - b) <= AGREE * max(abs(a), abs(b))


def disagreement(cand: dict | None, price, at_plan: dict, snapshot: dict, level) -> tuple[str, object, object] | None:
    """``(field, results' value, signed value)`` of the first way the results' candidate of a series differs from
    the decision ``snapshot`` signed on the same data; None when they agree.

    Family, ``coef`` (each within ``AGREE``) and ``smearing``; the plan numbers (``at_plan``: volume, lo, hi,
    elasticity) only where the results plan the price that was signed (the interval only at the ``level`` it
    was signed at).  With controls the signed curve holds them at the signed plan's values and the results'
    ``coef`` has them at 0 (and the plan's values may be new): only the price slopes (``coef[1:]``) are
    compared.  A candidate the results do not hold, or hold without coefficients: nothing to compare (the
    export writes the signed curve all the same).
    """
    if cand is None or cand.get("coef") is None:
        return None
    if cand.get("family") != snapshot.get("family"):
        return "family", cand.get("family"), snapshot.get("family")
    mine, signed = cand["coef"], snapshot.get("coef")
    if signed is None or len(mine) != len(signed):
        return "coef", mine, signed
    controlled = bool(snapshot.get("controls"))
    for i, (a, b) in enumerate(zip(mine, signed)):
        if not (i == 0 and controlled) and not _agree(a, b):
            return f"coef[{i}]", a, b
    if snapshot.get("smearing") is not None and not _agree(cand.get("smearing"), snapshot["smearing"]):
        return "smearing", cand.get("smearing"), snapshot["smearing"]
    signed_plan = snapshot.get("plan") or {}
    if controlled or price is None or signed_plan.get("price") != price:
        return None
    for name in ("volume", "lo", "hi", "elasticity") if snapshot.get("level") == level else ("volume", "elasticity"):
        if at_plan.get(name) is not None and signed_plan.get(name) is not None and \
                not _agree(at_plan[name], signed_plan[name]):
            return f"plan_{name}", at_plan[name], signed_plan[name]
    return None


def refusal(path, key: dict, field: str, results, signed, signed_what: str = "as signed") -> DataError:
    """The one line refusing an export whose results disagree with the ledger's signed model."""
    series = ", ".join(f"{name}={clean(str(value))}" for name, value in key.items())
    return DataError(f"series {series}: {field} is {_said(results)} in the results but {_said(signed)} "
                     f"{signed_what} in the ledger; the results are not what was signed (nothing was written)",
                     path=str(path))


def _said(value) -> str:
    return "null" if value is None else json.dumps(value) if isinstance(value, list) else repr(value)


def plan_cells(at_plan: dict) -> list:
    """``plan_volume``, ``plan_lo``, ``plan_hi`` and ``plan_elasticity`` of a row; no elasticity where the volume
    is at or below zero (a ratio of relative changes means nothing there, as the screen's "n/a")."""
    volume, elasticity = at_plan.get("volume"), at_plan.get("elasticity")
    if volume is None or not volume > 0 or elasticity is None or not math.isfinite(elasticity):
        elasticity = None
    return [_number(volume), _number(at_plan.get("lo")), _number(at_plan.get("hi")), _number(elasticity)]


def _signed_at_price(path, rows: list[list], later: list[tuple], level) -> None:
    """Fill in the plan numbers of rows whose decision was signed on these data at another plan price: the
    signed curve's volume, interval (at the signed level; none where the snapshot lacks its interval parts) and
    elasticity at this results' plan price, all such rows of a family at once.  Refuses (``refusal``) where
    the results' own volume there differs from the signed curve's (and their interval, at the same level)."""
    from fitcore.ledger.snapshot import at_prices
    signed = at_prices([item[2] for item in later], [item[3] for item in later], level)
    for (row, key, snapshot, price, theirs), ours in zip(later, signed):
        signed_level = snapshot.get("level")
        checked = ("volume", "elasticity") if signed_level != level else ("volume", "lo", "hi", "elasticity")
        for name in checked if not snapshot.get("controls") else ():
            if theirs.get(name) is not None and ours[name] is not None and not _agree(theirs[name], ours[name]):
                raise refusal(path, key, f"plan_{name}", theirs[name], ours[name],
                              f"on the curve signed (at plan price {price!r})")
        at = len(key) + 9  # plan_volume's place: the key columns, then status … plan_price
        rows[row][at:at + 4] = plan_cells(ours)


def coef_text(coef: list) -> str:
    """``json.dumps(coef)`` of a list of numbers, without its per-call machinery where that is the same text:
    finite floats are written by their ``repr``, as ``json`` writes them (any other value — NaN, an infinity,
    null, a whole number — through ``json.dumps``)."""
    try:
        text = ", ".join(map(float.__repr__, coef))  # TypeError for anything but floats
    except TypeError:
        return json.dumps(coef)
    return f"[{text}]" if "n" not in text else json.dumps(coef)  # "n": a nan or an inf


def carried_from(history) -> str:
    """``SEQ:DIGEST`` of the accept or override a standing ``carry`` carries forward ('' when none stands)."""
    current = history.current if history else None
    if current is None or current["action"] != "carry":
        return ""
    carried = history.carried
    return f"{carried['seq']}:{carried['digest']}" if carried else f"?:{current.get('carries')}"


def carried_decision(history) -> tuple[str, str, str]:
    """``(analyst, at, note)`` of the accept or override a standing ``carry`` carries forward (the decision a
    person made; the row's own ``analyst``, ``at`` and ``note`` are the carry's); empty when none stands."""
    carried = history.carried if history else None
    return (carried["analyst"], carried["at"], carried.get("note") or "") if carried else ("", "", "")


def _number(value):
    return "" if value is None else value


def write_text(path: Path, text: str) -> None:
    """Write through the project's one atomic writer (a new file gets 0666 less the umask; an existing
    one keeps its mode; a failed run leaves an earlier file whole), sealed before it is put in place
    (``fitcore.outputs.seal``: a later export replaces it only unchanged)."""
    from fitcore.outputs.atomic import signals_after, stage

    from .interrupts import check, in_place
    check()  # a signal recorded while a thread read: nothing is put in place after it
    staged = stage(path, lambda handle: handle.write(text.encode("utf-8")))  # sealed as it is staged
    with signals_after():  # a signal from the rename on: said after it ("after writing … in full")
        staged.commit()
        in_place([str(path)])
