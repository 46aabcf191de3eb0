"""The number and text formats every screen, ``show``, the report and the flag sentences share: one way to
write a quantity (``fmt``), a price (``money``), an interval (``span``), an elasticity (``two_places``), a ratio
(``ratio``, ``fmt_ratio``), a signed change (``signed``), a share (``pct``, ``pct_beside``) and a list of names
(``joined``)."""
from __future__ import annotations

import math


HUGE = 1e9


def fmt(x: float) -> str:
    """A quantity as an analyst reads it: 3,912 · 41.5 · 4.38 · 0.0372 · 0 · 6.47e+11 (from HUGE up, three
    significant digits as below 1: thirty-digit volumes ran into the next column and read as noise)."""
    if x is None or not math.isfinite(x):
        return "n/a"
    if abs(x) >= HUGE:
        return f"{x:.3g}"
    if x == int(x) or abs(x) >= 1000:
        return f"{x:,.0f}"
    if abs(x) >= 100:
        return f"{x:,.1f}"
    if abs(x) >= 1:
        return f"{x:.2f}"
    return f"{x:.3g}"


def money(x: float) -> str:
    """A price: two decimals (three significant digits below 0.10)."""
    if x is None or not math.isfinite(x):
        return "n/a"
    return f"{x:,.2f}" if abs(x) >= 0.1 else f"{x:.3g}"


def span(lo: float, hi: float) -> str:
    """An interval: "877–1,205", or "-6,752 to 16,270" where a bound is below zero (a dash beside a minus sign
    read as garbled)."""
    return f"{fmt(lo)}{' to ' if lo < 0 or hi < 0 else '–'}{fmt(hi)}"


def two_places(x: float) -> str:
    """An elasticity: two decimals, no "-0.00" for one that rounds to nothing."""
    text = f"{x:.2f}"
    return "0.00" if text == "-0.00" else text


def ratio(x: float) -> str:
    """A ratio such as a variance inflation: one decimal below 1,000 ("203.6"), past it in powers of ten
    ("3.0e8": "301345759.5" was a string of digits to count)."""
    if x is None or not math.isfinite(x):
        return "n/a"
    if abs(x) < 1000:
        return f"{x:.1f}"
    mantissa, exponent = f"{x:.1e}".split("e")
    return f"{mantissa}e{int(exponent)}"


def signed(x: float) -> str:
    """A quantity with its sign: "+2,846", "−259.6" (a minus sign), "0"."""
    return ("+" if x > 0 else "−" if x < 0 else "") + fmt(abs(x))


def pct(share: float) -> str:
    """A share in whole percent, grouped (1,226%); no "-0%" for a share that rounds to nothing."""
    text = f"{share * 100:,.0f}%"
    return "0%" if text == "-0%" else text


def pct_beside(share: float, bar: float) -> str:
    """``pct``, with as many decimals as it takes (up to three) not to read as the ``bar`` it is judged against:
    "29.96%" below a 30% bar, not "30%, below 30%"; closer than that, rounded away from the bar at the third
    decimal ("10.001%" for 10.0004% above a 10% bar), so it never reads as the bar or on its other side."""
    for digits in range(4):
        text, said = f"{share * 100:,.{digits}f}%", f"{bar * 100:,.{digits}f}%"
        if text != said:
            break
    else:
        if share != bar:
            away = math.ceil if share > bar else math.floor
            text = f"{away(share * 100_000) / 1000:,.3f}%"
    return "0%" if text == "-0%" else text


def fmt_ratio(value) -> str:
    """A ratio to one decimal ("1.9"; "n/a" for none): the backtest's error over the CV error."""
    return "n/a" if value is None or not math.isfinite(value) else f"{value:.1f}"


def joined(names) -> str:
    """"a", "a and b", "a, b and c"."""
    names = list(names)
    return names[0] if len(names) == 1 else ", ".join(names[:-1]) + " and " + names[-1]
