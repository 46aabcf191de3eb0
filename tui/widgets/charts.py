"""In-terminal charts of one series, drawn with plotext and shown as plain ``Text``.

plotext keeps one global figure, so charts are only ever built on the UI
thread.  Every label drawn here comes from numbers or candidate names, never
from users' text.  Curves differ by line style as well as colour (the standing
model solid, the other candidate dashed, the band dotted), and each legend entry
uses the very colour number its line is drawn with.
"""
from __future__ import annotations

import numpy as np
from rich.style import Style
from rich.text import Text

from fitcore.fit.results import Results

# 256-colour numbers (plotext draws them as 38;5;N; the legend uses the same numbers)
STANDING, OTHER, BAND, OBSERVED, PLAN, ONE_SE, SIGNED, NEW = 46, 45, 214, 255, 201, 214, 177, 226
UNOBSERVED = "#d7af5f"  # the warn colour: no observations will come, and why
SOLID = "braille"  # renders in a plain xterm-256color; sextant markers often do not
PLOTTABLE = 1e290  # largest size of a coordinate plotext is given (beyond it, its axis scaling overflows)
plt = None  # plotext: imported with the first chart, not with the screen (the list never waits for it)
LOG_RATIO = 10  # the fold chart goes to a log scale when the largest error is this many times the smallest mean


def _colour(number: int) -> Style:
    return Style(color=f"color({number})")


NICE = (1.0, 2.0, 2.5, 5.0)  # tick steps: these times a power of ten
LABEL_ROWS = 4  # rows of a chart outside its plot area: the frame's two, the x ticks, the axis labels


def _start(width: int, height: int) -> None:
    global plt
    if plt is None:
        import plotext
        plt = plotext
    plt.clf()
    plt.limitsize(False, False)  # the size asked for, whatever plotext takes the terminal's to be
    plt.plotsize(max(width, 20), max(height, 6))
    plt.theme("clear")
    plt.frame(True)


def _nice_at_least(value: float) -> float:
    """The smallest step in ``NICE`` times a power of ten that is at least ``value`` (> 0)."""
    power = 10.0 ** np.floor(np.log10(value))
    return next((n * power for n in NICE if n * power >= value * (1 - 1e-12)), 10 * power)


def even_ticks(lo: float, hi: float, rows: int) -> tuple[float, float, list[float]]:
    """An axis of ``rows`` rows covering ``lo``–``hi`` whose ticks are round numbers evenly spaced and each on
    a row: (bottom, top, ticks).  A row stands for ``unit`` = step / k, the axis runs from a multiple of the
    unit over exactly ``rows - 1`` units, and a tick is every k rows; of the k that fit, the one wasting the
    least height with three to seven ticks (two on a chart under five rows) is kept."""
    rows = max(int(rows), 2)
    span = hi - lo if hi > lo else max(abs(hi), 1.0)
    fewest = 2 if rows < 5 else 3
    best = None
    for k in range(1, rows):
        step = _nice_at_least(span / (rows - 1) * k)
        for _ in range(6):  # the bottom is rounded down to a unit: a larger round step may be needed
            unit = step / k
            bottom = np.floor(lo / unit + 1e-9) * unit
            top = bottom + (rows - 1) * unit
            if top >= hi - 1e-9 * abs(unit):
                break
            step = _nice_at_least(step * 1.0001)
        first = np.ceil(bottom / step - 1e-9) * step
        ticks = [float(t) for t in np.arange(first, top + step * 1e-6, step)]
        if not fewest <= len(ticks) <= 7 or top < hi - 1e-9 * abs(unit):
            continue
        if best is None or top - bottom < (best[1] - best[0]) * (1 - 1e-9):
            best = (float(bottom), float(top), ticks)
    return best if best is not None else (lo, hi, [lo, hi])


def tick_label(value: float, step: float) -> str:
    """A tick as round as its step: 2,500 · 1.25 · 0.05 (no '-0')."""
    power = int(np.floor(np.log10(step) + 1e-9))
    decimals = max(0, -power + (1 if round(step / 10.0 ** power, 6) == 2.5 else 0))  # 0.25 wants two
    text = f"{value:,.{decimals}f}"
    return "0" if float(text.replace(",", "")) == 0 else text


def _even_y_axis(values: list, height: int, window: tuple[float, float] | None = None, log: bool = False) -> None:
    """Round, evenly spaced y ticks each on a row, over ``window`` or else the plottable ``values``.  ``log``:
    on a log scale, evenly spaced in log10 (each a power of ten to a round exponent step, three figures)."""
    if window is None:
        seen = np.concatenate([np.asarray(v, dtype=float).ravel() for v in values] or [np.zeros(0)])
        seen = seen[_plottable(seen) & ((seen > 0) if log else True)]
        if not len(seen):
            return
        window = (float(seen.min()), float(seen.max()))
    rows = max(height, 6) - LABEL_ROWS
    if log:
        bottom, top, ticks = even_ticks(float(np.log10(window[0])), float(np.log10(window[1])), rows)
        plt.ylim(bottom, top)  # plotext takes a log axis's limits as exponents, its ticks as values
        values = [10.0 ** t for t in ticks]
        plt.yticks(values, [f"{v:,.0f}" if v >= 1000 else f"{float(f'{v:.3g}'):g}" for v in values])
        return
    bottom, top, ticks = even_ticks(*window, rows)
    plt.ylim(bottom, top)
    step = ticks[1] - ticks[0] if len(ticks) > 1 else abs(top - bottom) or 1.0
    plt.yticks(ticks, [tick_label(t, step) for t in ticks])


def _plottable(values) -> np.ndarray:
    """Where ``values`` are finite and at most ``PLOTTABLE`` in size: plotext fails on an infinity, and on
    finite values whose span overflows while it scales the axes (±1e307 did)."""
    with np.errstate(invalid="ignore"):
        return np.abs(np.asarray(values, dtype=float)) <= PLOTTABLE


def _finite(xs, ys) -> tuple[list, list]:
    """The points whose coordinates are both plottable (``_plottable``)."""
    xs, ys = np.asarray(xs, dtype=float), np.asarray(ys, dtype=float)
    keep = _plottable(xs) & _plottable(ys)
    return xs[keep].tolist(), ys[keep].tolist()


def _finish() -> Text:
    return Text.from_ansi(plt.build())


def on_chart(plan: float, lo: float, hi: float) -> bool:
    """Whether the price axis reaches out to the plan price: not beyond half the lowest observed price or twice
    the highest (prices of 2 to 4 with a plan at 1,000 put every observation in one column)."""
    return bool(np.isfinite(plan) and lo / 2 <= plan <= hi * 2)


def price_grid(lo: float, hi: float, plan: float, positive: bool) -> np.ndarray:
    """Prices to draw over: the observed range and the plan price (``on_chart``), with a margin of 8% either
    side."""
    if on_chart(plan, lo, hi):
        lo, hi = min(lo, plan), max(hi, plan)
    pad = (hi - lo) * 0.08 or max(abs(hi) * 0.05, 0.01)
    start = lo - pad
    if positive and start <= 0:  # a log-log curve has no value at or below a zero price
        start = lo / 2
    return np.linspace(start, hi + pad, 80)


def volume_window(inside: list[np.ndarray], everything: list[np.ndarray]) -> tuple[float, float] | None:
    """The volumes to show: what is seen over the observed prices (``inside``: the observations, the curves
    and band there) and half its span again either side; None when ``everything`` drawn fits in that anyway.
    A curve far out at a distant plan price (−70,401 beside observations of 500) otherwise squeezed every
    observation into one row; where it leaves the window it runs off the chart's edge."""
    seen = np.concatenate([np.asarray(v, dtype=float).ravel() for v in inside] or [np.zeros(0)])
    seen = seen[_plottable(seen)]
    drawn = np.concatenate([np.asarray(v, dtype=float).ravel() for v in everything] or [np.zeros(0)])
    drawn = drawn[_plottable(drawn)]
    if not len(seen) or not len(drawn):
        return None
    lo, hi = float(seen.min()), float(seen.max())
    margin = (hi - lo) / 2 or max(abs(hi) / 2, 1.0)
    lo, hi = lo - margin, hi + margin
    return (lo, hi) if drawn.min() < lo or drawn.max() > hi else None


def curve_chart(results: Results, s: int, width: int, height: int, model: int, units: dict,
                adjusted: bool = False, signed: dict | None = None, unobserved: str | None = None,
                rival: int = -1, role: str = "override") -> Text:
    """Observations, the ``model`` standing (solid), the proposal or runner-up (dashed), its prediction band
    (dotted) and the plan price (a vertical line).  ``rival``: the candidate a raised near-tie flag names,
    drawn as the runner-up (so the chart shows the curve the flag's sentence speaks of; -1: none, the
    lowest CV error after the proposal's is drawn).  ``role``: what a ``model`` that is not the proposal is
    (an override, or an accept of another fit's proposal on the same data).  ``adjusted``: with controls,
    each observation's volume moved to the plan's control values under ``model`` (partial residuals), as the
    curves are drawn.
    ``signed``: the snapshot of a curve signed on earlier data, drawn beside them (dash-dot), and the rows
    dated after its data's last date marked apart (×).  ``unobserved``: why the observations will not come,
    said where they would be drawn (else, without rows, that they are being read)."""
    # with the first chart, not with the screen: the list's first frame does not wait for it
    from fitcore.review.evidence import adjusted_volumes, band, curve, runner_up, series_rows
    price, volume, weight = series_rows(results, s)
    zero = np.zeros(len(price), dtype=bool) if weight is None else weight == 0  # no observations: drawn apart
    new = np.zeros(len(price), dtype=bool)
    if signed is not None and signed.get("last_date") and results.data.date is not None and len(price):
        rows = slice(results.data.offsets[s], results.data.offsets[s + 1])
        new = results.data.date[rows].astype("datetime64[D]") > np.datetime64(signed["last_date"])
    adjusted = adjusted and results.controls is not None and model >= 0 and results.rows_loaded
    if adjusted:
        volume = adjusted_volumes(results, s, model)
    _start(width, height)
    chosen = int(results.chosen[s])
    plan = float(results.plan_price[s])
    grid = price_grid(float(results.price_lo[s]), float(results.price_hi[s]), plan, results.price_lo[s] > 0)
    names = results.names
    tied = model == chosen and rival >= 0
    other = chosen if model != chosen else rival if tied else runner_up(results, s)
    xs = grid.tolist()
    lines = []  # (values over the grid, marker, colour), drawn in this order
    if model >= 0 and results.rows_loaded:
        lower, upper = band(results, s, model, grid)
        lines += [(lower, ".", BAND), (upper, ".", BAND)]
    if other >= 0:
        lines.append((curve(results, s, other, grid), "-", OTHER))
    if signed is not None:
        from fitcore.ledger.snapshot import signed_curve
        lines.append((signed_curve(signed, grid), "+", SIGNED))
    if model >= 0:
        lines.append((curve(results, s, model, grid), SOLID, STANDING))
    observed = (grid >= results.price_lo[s]) & (grid <= results.price_hi[s])
    window = volume_window([volume, *(ys[observed] for ys, _, _ in lines)], [volume, *(ys for ys, _, _ in lines)])
    for ys, marker, colour in lines:
        plt.plot(*_finite(xs, _inside(ys, window)), marker=marker, color=colour)
    shown_plan = on_chart(plan, float(results.price_lo[s]), float(results.price_hi[s]))
    if shown_plan:
        plt.vline(plan, PLAN)
    if len(price):  # observations last, so that curves through them do not hide them
        if zero.any():
            plt.scatter(*_finite(price[zero], volume[zero]), marker="○", color=OBSERVED)
        plt.scatter(*_finite(price[~new & ~zero], volume[~new & ~zero]), marker="•", color=OBSERVED)
        if (new & ~zero).any():
            plt.scatter(*_finite(price[new & ~zero], volume[new & ~zero]), marker="×", color=NEW)
    if _plottable(grid).all():
        plt.xlim(float(grid[0]), float(grid[-1]))
    _even_y_axis([volume, *(ys for ys, _, _ in lines)], height, window)
    plt.xlabel("price" + (f" ({units['price']})" if units.get("price") else ""))
    if units.get("volume"):
        plt.ylabel(f"volume ({units['volume']})")
    chart = _finish()
    # The legend goes under the chart, where it cannot cover the data.
    legend = Text()
    seen = "• observed, adjusted to the plan's controls (c: show them raw)" if adjusted else "• observed" + (
        ", raw (c: adjust them to the plan's controls)" if results.controls is not None else "")
    if results.rows_loaded:
        legend.append(seen, _colour(OBSERVED))
        if zero.any():
            legend.append("   ○ weight 0", _colour(OBSERVED))
    elif unobserved:
        legend.append(unobserved, UNOBSERVED)
    else:
        legend.append("observations and band: reading the data …", "dim")
    if model >= 0:
        legend.append(f"   ⠤⠤ {names[model]} ({'chosen' if model == chosen else role})", _colour(STANDING))
    if other >= 0:
        role = "proposed" if other == chosen else "near tie" if tied else "runner-up"
        legend.append(f"   -- {names[other]} ({role})", _colour(OTHER))
    if model >= 0 and results.rows_loaded:
        legend.append(f"   ·· {results.settings.level:.0%} prediction band", _colour(BAND))
    if signed is not None:
        legend.append(f"   ++ signed {signed['candidate']} (data to {signed.get('last_date') or '?'})", _colour(SIGNED))
        if new.any():
            legend.append(f"   × {int(new.sum())} new since", _colour(NEW))
    if shown_plan:
        legend.append("   │ plan price", _colour(PLAN))
    elif np.isfinite(plan):
        legend.append(f"   plan price {plan:,.2f}: off the chart, far beyond the observed prices", _colour(PLAN))
    if window is not None:
        legend.append("   (curves run off the chart away from the observed prices)", "dim")
    return Text("\n").join([chart, legend])


def _inside(values: np.ndarray, window: tuple[float, float] | None) -> np.ndarray:
    """``values`` with those outside the volume ``window`` left out (NaN: not drawn)."""
    if window is None:
        return values
    values = np.asarray(values, dtype=float)
    with np.errstate(invalid="ignore"):
        return np.where((values >= window[0]) & (values <= window[1]), values, np.nan)


def fold_chart(results: Results, s: int, width: int, height: int) -> Text:
    """Each available candidate's CV error: mean ± SE, the per-fold errors, the one-SE line."""
    _start(width, height)
    available = np.flatnonzero(results.available[s])
    if not len(available):
        plt.title("no candidate could be cross-validated")
        return _finish()
    folds = results.folds_of(s)
    positions = list(range(1, len(available) + 1))
    means = results.cv_mse[s, available]
    ses = results.cv_se[s, available]
    shown = folds[:, available][np.isfinite(folds[:, available]) & (folds[:, available] > 0)]
    spans = (means + ses)[np.isfinite(means + ses)]
    top = max(float(shown.max()) if len(shown) else 0.0, float(spans.max()) if len(spans) else 0.0)
    log_scale = top > LOG_RATIO * max(float(means.min()), 1e-300)
    if log_scale:  # one poor candidate would otherwise flatten all the others against the axis
        plt.yscale("log")
    # on a log scale only values above zero can be drawn (plotext took log10 of an exact 0 — a fold held out
    # of a line through its rows — and the screen died): a dot at 0 is left out, a bar's foot cut at the floor
    floor = min([float(v) for v in (*shown, *means[means > 0]) if v > 0] or [1e-300])
    drawn = (lambda xs, ys: _finite(*(np.asarray(a)[np.asarray(ys) > 0] for a in (xs, ys)))) if log_scale else _finite
    for x, c in zip(positions, available):
        errors = folds[:, c]
        if len(errors) <= 12:  # per-fold dots (leave-one-out has too many to read)
            plt.scatter(*drawn([x] * len(errors), errors), marker="•", color=OBSERVED)
    for x, m, e in zip(positions, means, ses):
        foot = max(m - e, floor) if log_scale else m - e
        plt.plot(*drawn([x, x], [foot, m + e]), marker=SOLID, color=OTHER)
    plt.scatter(*drawn(positions, means), marker="●", color=OTHER)
    best = int(np.argmin(means))
    if _plottable(means[best] + ses[best]) and (means[best] + ses[best] > 0 or not log_scale):
        plt.hline(float(means[best] + ses[best]), ONE_SE)
    chosen = int(results.chosen[s])
    if chosen in available:
        x = positions[list(available).index(chosen)]
        plt.scatter(*drawn([x], [results.cv_mse[s, chosen]]), marker="◆", color=STANDING)
    plt.xticks(positions, [results.names[c] for c in available])
    plt.xlim(0.5, len(available) + 0.5)
    _even_y_axis([shown, means - ses, means + ses, folds[:, available]], height, log=log_scale)
    plt.ylabel("held-out MSE" + (" (log scale)" if log_scale else ""))
    legend = Text("● CV mean ± SE", _colour(OTHER))
    legend.append("   • each fold", _colour(OBSERVED))
    legend.append("   ◆ chosen", _colour(STANDING))
    legend.append("   ── one-SE line", _colour(ONE_SE))
    return Text("\n").join([_finish(), legend])
