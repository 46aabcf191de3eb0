"""``pricefold show``: a results file as plain text, for scripts and plain SSH sessions."""
from __future__ import annotations

import math
from collections.abc import Callable, Iterable

import numpy as np

from fitcore.data.keys import SEPARATOR
from fitcore.review import choice
from fitcore.review.attention import attention_order
from fitcore.review.control_words import effect_words
from fitcore.review.formats import fmt, money
from fitcore.review.plan_words import elasticity_words, held_words, revenue_words, weighed_zero, weighting_words
from fitcore.text import clean, told_apart
from fitcore.widths import cells, distinct_keys

SEVERITY_ORDER = {"stop": 0, "warn": 1}


def select(series: list[dict], products, keys: dict[str, str], flag: str | None) -> list[dict]:
    """The records ``show``'s filters keep: a product among ``products`` (a list, or a ``fitcore.text.EitherForm``),
    a value among each of ``keys``' (column → a container, as ``products``), the flag ``flag``."""
    out = []
    for record in series:
        if products and record["key"].get(next(iter(record["key"]))) not in products:
            continue
        if any(record["key"].get(k) not in v for k, v in keys.items()):
            continue
        if flag and flag not in {f["code"] for f in record["flags"]}:
            continue
        out.append(record)
    return out


def filter_near_miss(every: Callable[[], list[dict]], typed_products: list[str], products, keys: dict) -> str:
    """``show``'s hint where its filters matched nothing: a near miss of ``--product`` among the results' products,
    else of each ``--key`` value (``keys``: column → typed value) among the series ``products`` (its
    ``EitherForm``) keeps, named with its column; ``every()``: the results' series' keys."""
    hint = near_miss(typed_products, first_values(every())) if typed_products else ""
    kept = kept_by(every(), products) if keys else []
    for name, value in keys.items():
        hint = hint or near_miss([value], (key.get(name) for key in kept), f"{name}=")
    if not hint and typed_products and keys:  # the product is there elsewhere, and respelled where the keys point
        from fitcore.text import EitherForm, original
        wanted = {name: EitherForm([original(value)]) for name, value in keys.items()}
        hint = near_miss(typed_products, first_values([key for key in every()
                                                       if all(key.get(name) in form for name, form in wanted.items())]))
    return hint


def filter_look_alikes(every: Callable[[], list[dict]], typed_products: list[str], products, keys: dict,
                       where: str) -> list[str]:
    """``show``'s notes where its filters matched: a product, and a value of each ``--key`` column among the
    series ``products`` keeps, that reads like the one typed (``also_alike``)."""
    notes = [also_alike(typed_products, first_values(every()), where)] if typed_products else []
    kept = kept_by(every(), products) if keys else []
    notes += [also_alike([value], (key.get(name) for key in kept), where, name) for name, value in keys.items()]
    return [note for note in notes if note]


def one_label(every, key: dict) -> str | None:
    """A series shown alone, told apart from the results' series (``every()``: their keys) whose key reads like its
    own (``North⟨U+0020⟩`` where ``North`` is there too), as the lists show it; None (the plain key) where none of
    its values could read like another's."""
    from fitcore.text import revealed
    mine = key_parts(key)
    if all(revealed(value) == value for value in mine):  # nothing to tell apart: no key read
        return None
    others = [key_parts(other) for other in every() if other != key]
    return SEPARATOR.join(told_apart([mine], others)[0])


def first_values(keys: list[dict]) -> list:
    """Each key's first value (its product)."""
    return [next(iter(key.values()), None) for key in keys]


def kept_by(keys: list[dict], products) -> list[dict]:
    """The keys whose product ``products`` keeps (all, where none was typed)."""
    return [key for key in keys if not products or next(iter(key.values()), None) in products]


def near_miss(typed: Iterable[str], names: Iterable, label: str = "") -> str:
    """"; did you mean 'apples 1 kg '?" — for a ``--product`` (or, after ``label`` such as ``region=``, a
    ``--key`` value) that names nothing: those of ``names`` (the results' or the ledger's values) that read
    alike loosely (``look_alikes``; up to three), quoted as the plan check's hint quotes it
    (``fitcore.text.hint_for``); '' where none does."""
    from fitcore.text import EitherForm, original
    names = distinct(names)
    for text in typed:
        text = original(text)
        typed_form = EitherForm([text])
        if any(name in typed_form for name in names):  # the value is there: another filter kept none
            continue
        alike = look_alikes(text, names)
        if alike:  # each, as several can read alike ('North', 'North '): up to three
            more = " …" if len(alike) > 3 else ""
            return f"; did you mean {' or '.join(label + hint for hint in hints(text, alike[:3]))}{more}?"
    return ""


def hints(typed: str, names: list[str]) -> list[str]:
    """``fitcore.text.hint_for`` of each of ``names`` for ``typed``; two that would print alike (a composed and a
    decomposed 'Süd') told apart, the one not in NFC form shown by code point ('Su⟨U+0308⟩d')."""
    from unicodedata import is_normalized, normalize

    from fitcore.text import clean, hint_for, reveal_unnormalised
    out = [hint_for(typed, name) for name in names]
    printed = [normalize("NFC", hint) for hint in out]
    for i, name in enumerate(names):
        if printed.count(printed[i]) > 1 and not is_normalized("NFC", name):
            out[i] = f"'{reveal_unnormalised(clean(name))}'"
    return out


def also_alike(typed: Iterable[str], names: Iterable, where: str, what: str = "product") -> str:
    """"note: LEDGER also holds the product 'apples 1 kg ', which reads alike (…)" — for a ``--product`` (or a
    ``--key`` value: ``what`` names its column) that found its series while ``where`` holds others whose value
    reads like it loosely (a renamed spelling is listed under its own name only); '' where none does."""
    from fitcore.text import original
    names = distinct(names)
    alike = list(dict.fromkeys(hint for text in typed for hint in hints(original(text), look_alikes(text, names))))
    if not alike:
        return ""
    if len(alike) == 1:
        return f"note: {where} also holds the {what} {alike[0]}, which reads alike (not listed: another {what})"
    return (f"note: {where} also holds the {what}s {', '.join(alike)}, which read alike (not listed: other "
            f"{what}s)")


def look_alikes(text: str, names: list[str]) -> list[str]:
    """The ``names`` that read like the typed ``text`` loosely (case, white space, Unicode form:
    ``fitcore.text.loose``) but that ``text`` does not pick (``fitcore.text.EitherForm``)."""
    from fitcore.text import EitherForm, loose, original
    text = original(text)
    typed_form, wanted = EitherForm([text]), loose(text)
    return [name for name in names if loose(name) == wanted and name not in typed_form]


def distinct(names: Iterable) -> list[str]:
    """The texts among ``names`` once each, in order (a null key is no text)."""
    return list(dict.fromkeys(str(name) for name in names if name is not None))


def in_attention_order(records: list[dict], first: Callable[[dict], int] | None = None,
                       stale: list[bool] | None = None) -> list[dict]:
    """The records as ``fitcore.review.attention`` orders series; ``first``: a rank of each record ahead of that
    order (``--product``'s: the product as typed before its other Unicode form); ``stale``: each record's data
    changed since its sign-off (a ledger's word), one stop flag more, as the screen raises ``stale``."""
    counted: dict[int, tuple[int, int]] = {}  # by flag list: the Parquet list reader shares equal ones

    def stops_warns(flags: list) -> tuple[int, int]:
        found = counted.get(id(flags))
        if found is None:
            stop = sum(f["severity"] == "stop" for f in flags)
            found = counted[id(flags)] = (stop, len(flags) - stop)
        return found
    pairs = [stops_warns(r["flags"]) for r in records]
    if stale is not None:
        pairs = [(stop + more, warn) for (stop, warn), more in zip(pairs, stale)]
    scores = [math.nan if r["score"] is None else r["score"] for r in records]
    order = attention_order([p[0] for p in pairs], [p[1] for p in pairs], scores)
    if first is not None:
        ranks = np.fromiter(map(first, records), np.int64, len(records))
        order = order[np.argsort(ranks[order], kind="stable")]
    return [records[i] for i in order.tolist()]


def number(x, how=fmt) -> str:
    """A number from a results file, or "—" where it is null (a series or candidate with nothing to say)."""
    return "—" if x is None else how(x)


def percent(share) -> str:
    """A whole percentage ("—" for none); one that rounds to zero is "0%", never "-0%" (as on the screen)."""
    if share is None or not math.isfinite(share):
        return "—"
    text = f"{share * 100:.0f}%"
    return "0%" if text == "-0%" else text


def key_parts(key: dict) -> tuple[str, ...]:
    """A series key's values as shown (``clean``'s), in its own order."""
    return tuple(clean(str(v)) for v in key.values())


def key_text(key: dict, named: str | None = None) -> str:
    """A series key as one line of text, control characters replaced.  ``named``: the product column, whose
    value is given alone, every other value after its column's name (``region=South``): for a list of series
    keyed by several sets of columns, where ``South`` alone could be a region or an area."""
    return _joined(key, key_parts(key), named)


def key_texts(keys: list[dict], named: str | None = None) -> list[str]:
    """``key_text`` of each of ``keys`` listed together: a value that reads like another among them though it
    differs (``café`` decomposed beside composed, ``East `` beside ``East``) shows what does not show by code
    point (``cafe⟨U+0301⟩``, ``East⟨U+0020⟩``: ``fitcore.text.told_apart``)."""
    shown = told_apart([key_parts(key) for key in keys])
    return [_joined(key, values, named) for key, values in zip(keys, shown)]


def _joined(key: dict, values: tuple[str, ...], named: str | None) -> str:
    if named:
        return SEPARATOR.join(value if name == named else f"{clean(str(name))}={value}"
                              for name, value in zip(key, values))
    return SEPARATOR.join(values)


def key_cells(keys: list[dict], width: int = 40, shown: dict[int, tuple[str, ...]] | None = None,
              beside: list[tuple[str, ...]] = ()) -> list[str]:
    """Each ``key_text`` in ``width`` cells (padded) for a list's column, by the triage list's rule
    (``fitcore.widths.distinct_keys``): each part keeps a share and long ones lose their middle, cut
    again where two would read the same, so rows of different series read differently.  ``shown``: the parts
    of some keys (by place) as the caller shows them already, as the triage list's ``label_parts`` does (a
    look-alike told apart from the ledger's spelling, ``fitcore.ledger.respelling.beside``); ``beside``: keys the
    words around name (the missing note's), each part reading like one of theirs told apart from it."""
    shown = shown or {}
    parts = told_apart([shown.get(i) or key_parts(key) for i, key in enumerate(keys)], beside)
    labels = distinct_keys(parts, width, SEPARATOR, cells)
    return [pad_cells(label, width) for label in labels]


def pad_cells(text: str, width: int) -> str:
    """``text`` padded with spaces to ``width`` terminal cells (a CJK name or an emoji takes two)."""
    return text + " " * max(width - cells(text), 0)


def flag_codes(flags: list, said: dict) -> str:
    """The codes of a flag list as a list shows them ("—" for none), remembered in ``said`` by list."""
    text = said.get(id(flags))
    if text is None:
        text = said[id(flags)] = " ".join(f["code"] for f in flags) or "—"
    return text


def table(records: list[dict], first: Callable[[dict], int] | None = None) -> str:
    lines = [f"{'series':<40} {'n':>5} {'chosen':<7} {'score':>6}  flags"]
    said: dict[int, str] = {}
    ordered = in_attention_order(records, first)
    for r, label in zip(ordered, key_cells([r["key"] for r in ordered])):
        score = percent(r["score"])
        lines.append(f"{label} {r['n']:>5} {r['chosen'] or '—':<7} {score:>6}  "
                     f"{flag_codes(r['flags'], said)}")
    return "\n".join(lines)


def why_chosen(record: dict) -> str:
    scored = [(c["name"], c["cv_mse"], c["cv_se"]) for c in record["candidates"] if c["available"]]
    return choice.why_chosen(scored, record["chosen"], record["rule"])


def control_lines(record: dict, binary=()) -> list[str]:
    """With controls: the values curves are held at, the chosen candidate's control effects, what is left out."""
    values = record.get("control_values")
    if values is None:
        return []
    out = ["", f"controls held at the plan's values: {held_words(values)}"]
    chosen = next((c for c in record["candidates"] if c["name"] == record["chosen"]), None)
    if chosen and chosen.get("controls"):
        words = effect_words(chosen["controls"], binary, "smearing" in chosen)
        out.append(f"  with the fitted curve {chosen['name']}: " + " · ".join(words))
    for name, why in (record.get("controls_left_out") or {}).items():
        out.append(f"  left out: {clean(why)}")
    return out


def slope(at_plan: dict, record: dict, model: str | None) -> str:
    """The elasticity at the plan price (``at_plan``: its volume and elasticity) of candidate ``model`` of
    ``record``, as it can be read (``fitcore.review.plan_words.elasticity_words``)."""
    lo, hi = record["price_range"]
    cand = next((c for c in record["candidates"] if c["name"] == model), None)
    flat = model if cand is not None and cand.get("degree") == 0 else None
    tied = next((tied_control(f["message"]) for f in record["flags"] if f["code"] == "price-tied"), None)
    return elasticity_words(at_plan.get("elasticity"), at_plan.get("volume"), lo is None or hi is None or hi > lo,
                            flat, tied)


def tied_control(message: str) -> str:
    """The control a price-tied flag's sentence names ('' where it cannot be read from it)."""
    for opening, closing in (("Price moved so closely with ", " (variance inflation"),
                             ("Price moved exactly with ", ", so")):
        if message.startswith(opening) and closing in message:
            return message[len(opening):message.index(closing)]
    return ""


def plan_line(record: dict) -> str:
    """The plan price's line: volume, interval, elasticity, and whether it is an extrapolation — in price, or in a
    control whose plan value the series has not seen (the outside-range flag says which); without a model, the
    plan price alone."""
    plan = record["plan"]
    codes = {f["code"] for f in record["flags"]}
    where = (" — outside the observed prices: an extrapolation" if not plan["inside_range"] else
             " — a control's plan value lies outside the values this series has seen (see outside-range)"
             if "outside-range" in codes else "")
    if record["chosen"] is None:  # the plan file's price all the same, as the export and the report give it
        return f"plan price {number(plan['price'], money)}: no model, so no volume predicted there{where}"
    return (f"plan price {number(plan['price'], money)}: volume {number(plan['volume'])} "
            f"({percent(plan['level'])} prediction interval {number(plan['lo'])} to {number(plan['hi'])}), "
            f"{slope(plan, record, record['chosen'])}{where}")


def detail(record: dict, binary=(), label: str | None = None, weight: str | None = None) -> str:
    """One series in full; ``binary``: the 0/1 controls of the results (the header's settings); ``label``: its key
    as the caller shows it (else ``key_text``); ``weight``: the weight column of a weighted fit."""
    lo, hi = record["price_range"]
    zero = weighed_zero(record.get("n_weight_0"))  # a weighted fit's rows of weight 0: in n, not in the range
    seen = f"{record['n']} observation{'s' * int(record['n'] != 1)}{zero}"
    out = [f"{label or key_text(record['key'])} — {seen}, prices {money(lo)}–{money(hi)}",
           *([weighting_words(clean(weight))] if weight else []),
           f"chosen: {record['chosen'] or 'none'} ({record['rule']}): {why_chosen(record)}", "",
           f"  {'candidate':<10} {'CV MSE':>12} {'± SE':>10} {'Q²':>6} {'R²':>6}"]
    for c in record["candidates"]:
        mark = "✓" if c["name"] == record["chosen"] else " "
        if not c["available"]:
            out.append(f"{mark} {c['name']:<10} unavailable: {c['reason']}")
            continue
        out.append(f"{mark} {c['name']:<10} {number(c['cv_mse']):>12} {number(c['cv_se']):>10} "
                   f"{percent(c['q2']):>6} {percent(c['r2']):>6}")
    out.extend(control_lines(record, binary))
    out.append("")
    if record["flags"]:
        out.append("flags:")
        for f in sorted(record["flags"], key=lambda f: SEVERITY_ORDER[f["severity"]]):
            out.append(f"  [{f['severity']}] {f['code']}: {f['message']}")
    else:
        out.append("flags: none")
    if record.get("plan"):
        out.append(plan_line(record))
    if record.get("revenue_price") is not None:
        influential = any(f["code"] == "influential-point" for f in record["flags"])
        out.append(revenue_words(money(record["revenue_price"]), influential))
    return "\n".join(out)
