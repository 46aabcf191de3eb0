"""One series' chart for the report, drawn by matplotlib and inlined as SVG.

matplotlib's SVG backend writes the chart; this module only moves its inline
``style`` attributes into SVG presentation attributes (so the page's
content-security policy needs no ``'unsafe-inline'`` for styles), drops its
metadata and its unreferenced ids, and gives each chart its own id salt so
several charts share one page without clashing.  Every label drawn comes from
numbers or candidate names, never from users' text (the key is the section's
heading, in HTML).
"""
from __future__ import annotations

import io
import re
from dataclasses import dataclass

import numpy as np

from fitcore.ledger.snapshot import signed_curve
from fitcore.review.evidence import band, curve

STANDING, PROPOSAL, BAND, PLAN, POINTS = "#1d5f99", "#b4531c", "#9cc3e4", "#6b3a8c", "#4d4d4d"
RC = {"svg.fonttype": "none", "font.size": 9, "axes.spines.top": False, "axes.spines.right": False,
      "axes.prop_cycle": "cycler(color=['#1d5f99'])", "path.simplify": True}


@dataclass(frozen=True)
class ChartInput:
    """What one chart shows.  ``fit``/``at``: the results and series index to evaluate (a fit of the
    data when it matches, else the results as read); ``rows``: observations and band available;
    ``standing``/``proposal``: candidate indices (-1: none); ``words``: how the standing curve is named;
    ``signed``: the snapshot the standing curve is drawn from (a stale series; the proposal and the band are
    then this fit's)."""

    fit: object
    at: int
    rows: bool
    standing: int
    proposal: int
    words: str
    signed: dict | None = None  # a stale series' signed snapshot: its curve as signed, not this fit's


@dataclass(frozen=True)
class Drawn:
    """A chart (``svg``, '' when there is none) and what its key lists: the curves' names, whether the
    band and the observations are drawn, the plan price, and a ``note`` when they are missing."""

    svg: str
    standing: str = ""
    proposal: str = ""
    band: bool = False
    plan: str = ""
    points: bool = False
    note: str = ""
    weight_0: bool = False  # rows of weight 0 drawn (hollow): not observations


class ChartMaker:
    """Draws every chart on one figure whose artists are made once and given new data each time
    (clearing the axes made its ticks, lines and texts again: 3× the time a chart)."""

    def __init__(self) -> None:
        import matplotlib
        from matplotlib.figure import Figure
        from matplotlib.ticker import FuncFormatter, MaxNLocator
        self._matplotlib = matplotlib
        with matplotlib.rc_context(RC):
            # Fixed margins, not a layout engine: constrained layout measured every label again (×6 the time).
            self.figure = Figure(figsize=(6.4, 3.0))
            ax = self.axes = self.figure.add_axes((0.11, 0.15, 0.87, 0.82))
            self.proposal, = ax.plot([], [], color=PROPOSAL, linestyle=(0, (5, 3)), linewidth=1.6)
            self.standing, = ax.plot([], [], color=STANDING, linewidth=2.0)
            self.plan = ax.axvline(0.0, color=PLAN, linestyle=(0, (1, 2)), linewidth=1.6)
            self.points = ax.scatter([], [], s=9, color=POINTS, zorder=3, linewidths=0)
            self.zero = ax.scatter([], [], s=9, facecolors="none", edgecolors=POINTS, zorder=3, linewidths=0.7)
            self.band = None
            ax.set_xlabel("price")
            ax.set_ylabel("volume")
            ax.grid(True, axis="y", color="#dddddd", linewidth=0.6)
            ax.set_axisbelow(True)
            ax.xaxis.set_major_locator(MaxNLocator(5))
            ax.yaxis.set_major_locator(MaxNLocator(5))
            ax.xaxis.set_major_formatter(FuncFormatter(_thousands))
            ax.yaxis.set_major_formatter(FuncFormatter(_thousands))
        self.count = 0

    def draw(self, chart: ChartInput, label: str, note: str = "", salt: str = "") -> Drawn:
        """The chart as an inline ``<svg>`` element and its key; ``label`` (escaped by the caller) is the
        chart's accessible name; ``salt`` makes its ids unique in the page.  The key is written in HTML
        beside it: a legend drawn by matplotlib cost more than the rest of the chart."""
        self.count += 1
        with self._matplotlib.rc_context({**RC, "svg.hashsalt": salt or f"pf{self.count}"}):
            self._draw(chart)
            buffer = io.StringIO()
            self.figure.savefig(buffer, format="svg", metadata={"Date": None})
        names, plan = chart.fit.names, float(chart.fit.plan_price[chart.at])
        standing = (chart.signed.get("candidate") or names[chart.standing]) if chart.signed else (
            names[chart.standing] if chart.standing >= 0 else "")
        return Drawn(inline_svg(buffer.getvalue(), label), f"{standing} ({chart.words})" if standing else "",
                     f"{names[chart.proposal]} (proposal)" if _proposal_drawn(chart) else "",
                     chart.rows and _banded(chart) >= 0, f"{plan:,.2f}" if np.isfinite(plan) else "",
                     chart.rows, note, bool(self.zero.get_visible()))

    def _draw(self, chart: ChartInput) -> None:
        results, s, ax = chart.fit, chart.at, self.axes
        grid = price_grid(results, s)
        plan = float(results.plan_price[s])
        ys = []
        if self.band is not None:
            self.band.remove()
            self.band = None
        banded = _banded(chart)
        if banded >= 0 and chart.rows:
            lower, upper = band(results, s, banded, grid)
            self.band = ax.fill_between(grid, lower, upper, color=BAND, alpha=0.45, linewidth=0)
            ys += [lower, upper]
        for line, c in ((self.proposal, chart.proposal if _proposal_drawn(chart) else -1),
                        (self.standing, 0 if chart.signed else chart.standing)):
            line.set_visible(c >= 0)
            if c >= 0:
                values = signed_curve(chart.signed, grid) if line is self.standing and chart.signed else curve(
                    results, s, c, grid)
                line.set_data(grid, values)
                ys.append(values)
        self.plan.set_visible(bool(np.isfinite(plan)))
        if np.isfinite(plan):
            self.plan.set_xdata([plan, plan])
        self.points.set_visible(chart.rows)
        self.zero.set_visible(False)
        if chart.rows:
            from fitcore.review.evidence import series_rows
            price, volume, weight = series_rows(results, s)
            zero = np.zeros(len(price), bool) if weight is None else weight == 0  # no observations: apart
            self.points.set_offsets(np.column_stack((price[~zero], volume[~zero])))
            if zero.any():
                self.zero.set_offsets(np.column_stack((price[zero], volume[zero])))
                self.zero.set_visible(True)
            ys.append(volume)
        values = np.concatenate([np.asarray(y, dtype=float).ravel() for y in ys]) if ys else np.zeros(1)
        values = values[np.isfinite(values)]
        low, high = (float(values.min()), float(values.max())) if len(values) else (0.0, 1.0)
        pad = (high - low) * 0.05 or max(abs(high) * 0.05, 1.0)
        ax.set_xlim(grid[0], grid[-1])
        ax.set_ylim(low - pad, high + pad)


def _proposal_drawn(chart: ChartInput) -> bool:
    """The proposal has its own line unless it is the curve that stands (a signed snapshot never is)."""
    return chart.proposal >= 0 and (chart.proposal != chart.standing or chart.signed is not None)


def _banded(chart: ChartInput) -> int:
    """The candidate of this fit whose 95% band is drawn: the standing one, else (held, pending without a
    standing curve, or signed on other data) the proposal."""
    return chart.proposal if chart.signed is not None or chart.standing < 0 else chart.standing


def _thousands(value, _position=None) -> str:
    text = f"{value:,.0f}" if abs(value) >= 100 else f"{value:,.3g}"
    return text.replace("-", "\N{MINUS SIGN}")


def price_grid(results, s: int, points: int = 120) -> np.ndarray:
    """Prices over the observed range widened to take in the plan price, with a small margin."""
    lo, hi = float(results.price_lo[s]), float(results.price_hi[s])
    plan = float(results.plan_price[s])
    if np.isfinite(plan):
        lo, hi = min(lo, plan), max(hi, plan)
    pad = (hi - lo) * 0.04 or max(abs(hi) * 0.05, 0.01)
    start = lo - pad if results.price_lo[s] <= 0 or lo - pad > 0 else lo / 1.05
    return np.linspace(start, hi + pad, points)


_STYLE = re.compile(r' style="([^"]*)"')
_ID = re.compile(r' id="([^"]*)"')
_GEOMETRY = re.compile(r'( (?:d|x|y|transform)=")([^"]*)"')
_DECIMALS = re.compile(r"(\.\d)\d+")  # a tenth of a point is finer than any screen or printer shows
_REFERENCE = re.compile(r'(?:url\(#|href="#)([^)"]+)')


def _attributes(match: re.Match) -> str:
    out = []
    for declaration in match.group(1).split(";"):
        name, _, value = declaration.partition(":")
        name, value = name.strip(), value.strip()
        if not name:
            continue
        if name == "font":  # "10px 'DejaVu Sans'": the size as an attribute; the page's CSS sets the family
            size = next((part for part in value.split() if part.endswith("px")), None)
            if size:
                out.append(f'font-size="{size}"')
            continue
        out.append(f'{name}="{value}"')
    return " " + " ".join(out) if out else ""


def inline_svg(document: str, label: str) -> str:
    """matplotlib's SVG document as an element to inline in HTML, styled by attributes only."""
    body = document[document.index("<svg"):]
    body = re.sub(r"<metadata>.*?</metadata>\s*", "", body, flags=re.S)
    body = re.sub(r"<style[^>]*>.*?</style>\s*", "", body, flags=re.S)
    body = _STYLE.sub(_attributes, body)
    body = _GEOMETRY.sub(lambda m: m.group(1) + _DECIMALS.sub(r"\1", m.group(2)) + '"', body)
    referenced = set(_REFERENCE.findall(body))
    body = _ID.sub(lambda m: m.group(0) if m.group(1) in referenced else "", body)
    body = re.sub(r'<svg [^>]*?(viewBox="[^"]*")[^>]*>',
                  lambda m: f'<svg xmlns="http://www.w3.org/2000/svg" xmlns:xlink="http://www.w3.org/1999/xlink" '
                            f'{m.group(1)} role="img" aria-label="{label}">', body, count=1)
    return re.sub(r">\s+<", "><", body.strip()).replace(" \n", " ")
