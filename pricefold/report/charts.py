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

from fitcore.review.evidence import band, curve

STANDING, PROPOSAL, BAND, PLAN, POINTS = "#1d5f99", "#b4531c", "#9cc3e4", "#6b3a8c", "#4d4d4d"
RC = {"svg.fonttype": "none", "font.size": 9, "axes.spines.top": False, "axes.spines.right": False,
      "axes.prop_cycle": "cycler(color=['#1d5f99'])", "path.simplify": True}


@dataclass(frozen=True)
class ChartInput:
    """What one chart shows.  ``fit``/``at``: the results and series index to evaluate (a fit of the
    data when it matches, else the results as read); ``rows``: observations and band available;
    ``standing``/``proposal``: candidate indices (-1: none); ``words``: how the standing curve is named."""

    fit: object
    at: int
    rows: bool
    standing: int
    proposal: int
    words: str


class ChartMaker:
    """Draws charts on one reused figure (matplotlib is imported on the first chart)."""

    def __init__(self) -> None:
        import matplotlib
        from matplotlib.figure import Figure
        self._matplotlib = matplotlib
        with matplotlib.rc_context(RC):
            self.figure = Figure(figsize=(6.4, 3.3), layout="constrained")
        self.count = 0

    def svg(self, chart: ChartInput, label: str) -> str:
        """The chart as an inline ``<svg>`` element; ``label`` (escaped by the caller) is its accessible name."""
        self.count += 1
        with self._matplotlib.rc_context({**RC, "svg.hashsalt": f"pf{self.count}"}):
            self.figure.clear()
            self._draw(self.figure.add_subplot(), chart)
            buffer = io.StringIO()
            self.figure.savefig(buffer, format="svg", metadata={"Date": None})
        return inline_svg(buffer.getvalue(), label)

    def _draw(self, ax, chart: ChartInput) -> None:
        results, s = chart.fit, chart.at
        names = results.names
        grid = price_grid(results, s)
        plan = float(results.plan_price[s])
        if chart.standing >= 0 and chart.rows:
            lower, upper = band(results, s, chart.standing, grid)
            ax.fill_between(grid, lower, upper, color=BAND, alpha=0.45, linewidth=0, label="95% prediction band")
        if chart.proposal >= 0 and chart.proposal != chart.standing:
            ax.plot(grid, curve(results, s, chart.proposal, grid), color=PROPOSAL, linestyle=(0, (5, 3)),
                    linewidth=1.6, label=f"{names[chart.proposal]} (proposal)")
        if chart.standing >= 0:
            ax.plot(grid, curve(results, s, chart.standing, grid), color=STANDING, linewidth=2.0,
                    label=f"{names[chart.standing]} ({chart.words})")
        if np.isfinite(plan):
            ax.axvline(plan, color=PLAN, linestyle=(0, (1, 2)), linewidth=1.6, label=f"plan price {plan:,.2f}")
        if chart.rows:
            from fitcore.review.evidence import series_rows
            price, volume, _ = series_rows(results, s)
            ax.scatter(price, volume, s=9, color=POINTS, zorder=3, linewidths=0, label="observed")
        ax.set_xlabel("price")
        ax.set_ylabel("volume")
        ax.grid(True, color="#dddddd", linewidth=0.6)
        ax.set_axisbelow(True)
        ax.ticklabel_format(axis="both", style="plain", useOffset=False)
        ax.yaxis.set_major_formatter(_thousands)
        if ax.get_legend_handles_labels()[0]:
            ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.2), ncol=3, frameon=False, fontsize=8)


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
    referenced = set(_REFERENCE.findall(body))
    body = _ID.sub(lambda m: m.group(0) if m.group(1) in referenced else "", body)
    body = re.sub(r'<svg [^>]*?(viewBox="[^"]*")[^>]*>',
                  lambda m: f'<svg xmlns="http://www.w3.org/2000/svg" xmlns:xlink="http://www.w3.org/1999/xlink" '
                            f'{m.group(1)} role="img" aria-label="{label}">', body, count=1)
    return re.sub(r">\s+<", "><", body.strip()).replace(" \n", " ")
