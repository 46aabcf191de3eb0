"""In-terminal charts of one series, drawn with plotext and shown as plain ``Text``.

plotext keeps one global figure, so charts are only ever built on the UI
thread.  Every label drawn here comes from numbers or candidate names, never
from users' text.
"""
from __future__ import annotations

import numpy as np
import plotext as plt
from rich.text import Text

from fitcore.fit.results import Results
from fitcore.review.evidence import band, curve, runner_up, series_rows

MARKER = "braille"  # renders in a plain xterm-256color; sextant markers often do not


def _start(width: int, height: int) -> None:
    plt.clf()
    plt.plotsize(max(width, 20), max(height, 6))
    plt.theme("clear")
    plt.frame(True)


def _finish() -> Text:
    return Text.from_ansi(plt.build())


def curve_chart(results: Results, s: int, width: int, height: int) -> Text:
    """Observations, the chosen curve, the runner-up, the 95% band and the plan price."""
    price, volume, _ = series_rows(results, s)
    _start(width, height)
    chosen = int(results.chosen[s])
    plan = results.plan_price[s]
    lo_p, hi_p = float(results.price_lo[s]), float(results.price_hi[s])
    if np.isfinite(plan):
        lo_p, hi_p = min(lo_p, plan), max(hi_p, plan)
    pad = (hi_p - lo_p) * 0.03 or max(abs(hi_p) * 0.05, 0.01)
    grid = np.linspace(max(lo_p - pad, 1e-9 if results.price_lo[s] > 0 else lo_p - pad), hi_p + pad, 80)
    names = results.names
    if chosen >= 0 and results.rows_loaded:
        lower, upper = band(results, s, chosen, grid)
        plt.plot(grid.tolist(), lower.tolist(), marker=MARKER, color="orange+")
        plt.plot(grid.tolist(), upper.tolist(), marker=MARKER, color="orange+")
    if chosen >= 0:
        other = runner_up(results, s)
        if other >= 0:
            plt.plot(grid.tolist(), curve(results, s, other, grid).tolist(), marker=MARKER, color="cyan")
        plt.plot(grid.tolist(), curve(results, s, chosen, grid).tolist(), marker=MARKER, color="green+")
    if np.isfinite(plan):
        plt.vline(float(plan), "magenta")
    # Observations last, so that curves through them do not hide them.
    if len(price):
        plt.scatter(price.tolist(), volume.tolist(), marker="dot", color="gray")
    plt.xlabel("price")
    chart = _finish()
    # The legend goes under the chart, where it cannot cover the data.
    legend = Text("• observed" if results.rows_loaded else "observations and band: reading the data …",
                  style="grey62")
    if chosen >= 0:
        legend.append(f"   ── {names[chosen]} (chosen)", style="green")
        other = runner_up(results, s)
        if other >= 0:
            legend.append(f"   ── {names[other]} (runner-up)", style="cyan")
        if results.rows_loaded:
            legend.append("   ── 95% prediction band", style="orange1")
    if np.isfinite(plan):
        legend.append("   │ plan price", style="magenta")
    return Text("\n").join([chart, legend])


def fold_chart(results: Results, s: int, width: int, height: int) -> Text:
    """Each available candidate's CV error: mean ± SE, the per-fold errors, the one-SE line."""
    _start(width, height)
    available = np.flatnonzero(results.available[s])
    if not len(available):
        plt.title("no candidate could be cross-validated")
        return _finish()
    folds = results.folds_of(s)
    positions = list(range(1, len(available) + 1))
    for x, c in zip(positions, available):
        errors = folds[:, c]
        if len(errors) <= 12:  # per-fold dots (leave-one-out has too many to read)
            plt.scatter([x] * len(errors), errors.tolist(), marker="dot", color="gray")
    means = results.cv_mse[s, available]
    ses = results.cv_se[s, available]
    for x, m, e in zip(positions, means, ses):
        plt.plot([x, x], [float(m - e), float(m + e)], marker=MARKER, color="cyan")
    plt.scatter(positions, means.tolist(), marker="●", color="cyan")
    best = int(np.argmin(means))
    plt.hline(float(means[best] + ses[best]), "orange")
    chosen = int(results.chosen[s])
    if chosen in available:
        x = positions[list(available).index(chosen)]
        plt.scatter([x], [float(results.cv_mse[s, chosen])], marker="◆", color="green+")
    plt.xticks(positions, [results.names[c] for c in available])
    plt.xlim(0.5, len(available) + 0.5)
    shown = folds[:, available][np.isfinite(folds[:, available]) & (folds[:, available] > 0)]
    log_scale = len(shown) and shown.max() > 30 * max(float(means.min()), 1e-300)
    if log_scale:  # one poor candidate would otherwise flatten all the others against the axis
        plt.yscale("log")
    plt.ylabel("held-out MSE" + (" (log scale)" if log_scale else ""))
    legend = Text("● CV mean ± SE   • each fold", style="cyan")
    legend.append("   ◆ chosen", style="green")
    legend.append("   ── one-SE line", style="orange1")
    return Text("\n").join([_finish(), legend])
