"""Write the invented demo scenario: weekly price and volume at a made-up
regional wholesaler of fresh produce and pantry goods.

Everything here is invented: product descriptions are generic, the regions
are points of the compass, the numbers come from the seeded generator below.
Run ``python sample/generate.py`` to rewrite ``wholesale.csv`` and ``plan.csv``
(the output is byte-for-byte the same on every run).

Every row says whether its week was a promotion (``promo`` = 1: the price was
cut 10–30% that week).  A few series are awkward on purpose, so every doubt
the triage screen can raise has a live example:

- ``saffron threads 1 g`` (North): only 9 weeks of history;
- ``table salt 1 kg``: a price that barely moves;
- ``truffle oil 250 ml``: volume that rises with price — promotions were cut
  in weeks of heavy demand, so the promotion weeks are the quiet ones and
  price and demand are confounded.  Fitted with ``--control promo`` the curve
  falls with price again: the promotion flag carries the difference between
  quiet and busy weeks;
- ``ground coffee 250 g``: promotion weeks came with an in-store display that
  sold 30% more than the price cut alone; the plan has a promotion week for
  it in the South (``plan.csv``'s ``promo`` column);
- ``strawberries 400 g``, ``blueberries 150 g``, ``mangoes 2 pack``: seasonal
  produce, plentiful and cheaper in their season (``--season 1`` holds the
  season fixed);
- ``cherry tomatoes 250 g`` (South): one week with a bulk order 6× normal;
- ``fresh figs 500 g``: weeks with zero sales (out of stock);
- ``dried apricots 500 g`` (East): a plan price far above anything charged;
- ``lemons 500 g`` (East): straight-line demand and a plan so far above history
  that the line predicts negative volume there;
- ``flour 1 kg`` (South): price moved in only two steps.
"""
from __future__ import annotations

import csv
from datetime import date, timedelta
from pathlib import Path

import numpy as np

SEED = 20261202
WEEKS = 104
REGIONS = ("North", "East", "South")
PRODUCTS = [
    # name, base price, base weekly volume, elasticity, curvature
    ("apples 1 kg", 2.40, 900, -1.3, 0.0), ("pears 1 kg", 2.60, 520, -1.5, 0.0),
    ("bananas 1 kg", 1.50, 1400, -0.8, 0.0), ("oranges 1 kg", 2.20, 700, -1.1, 0.3),
    ("lemons 500 g", 1.80, 380, -0.9, 0.0), ("grapes 500 g", 3.20, 450, -1.8, 0.0),
    ("strawberries 400 g", 3.50, 600, -2.2, 0.5), ("blueberries 150 g", 2.90, 420, -2.0, 0.0),
    ("cherry tomatoes 250 g", 1.90, 650, -1.4, 0.0), ("cucumbers each", 0.80, 800, -1.0, 0.0),
    ("carrots 1 kg", 1.10, 1000, -0.6, 0.0), ("potatoes 2.5 kg", 2.80, 850, -0.5, 0.0),
    ("onions 1 kg", 1.20, 760, -0.5, 0.0), ("garlic 3 pack", 1.00, 300, -0.7, 0.0),
    ("broccoli each", 1.30, 540, -1.2, 0.4), ("spinach 200 g", 1.70, 410, -1.6, 0.0),
    ("lettuce each", 0.95, 620, -1.3, 0.0), ("peppers 3 pack", 2.10, 480, -1.4, 0.0),
    ("mushrooms 250 g", 1.60, 560, -1.5, 0.0), ("mangoes 2 pack", 2.50, 390, -2.1, 0.6),
    ("fresh figs 500 g", 4.50, 60, -1.8, 0.0), ("fresh herbs 30 g", 0.90, 330, -1.1, 0.0),
    ("basmati rice 1 kg", 2.70, 640, -0.9, 0.0), ("long grain rice 1 kg", 1.60, 700, -0.8, 0.0),
    ("pasta 500 g", 0.95, 1200, -1.2, 0.0), ("spaghetti 500 g", 0.90, 1100, -1.2, 0.0),
    ("flour 1 kg", 1.05, 680, -0.5, 0.0), ("sugar 1 kg", 1.10, 720, -0.4, 0.0),
    ("table salt 1 kg", 0.60, 410, -0.2, 0.0), ("rolled oats 1 kg", 1.80, 520, -0.9, 0.0),
    ("lentils 500 g", 1.40, 330, -1.0, 0.0), ("chickpeas tin", 0.75, 610, -1.3, 0.0),
    ("kidney beans tin", 0.70, 540, -1.2, 0.0), ("chopped tomatoes tin", 0.65, 980, -1.4, 0.0),
    ("olive oil 500 ml", 5.20, 340, -1.7, 0.3), ("sunflower oil 1 l", 2.60, 450, -1.1, 0.0),
    ("truffle oil 250 ml", 9.50, 45, -1.0, 0.0), ("honey 340 g", 3.80, 260, -1.3, 0.0),
    ("strawberry jam 340 g", 2.10, 310, -1.2, 0.0), ("peanut butter 340 g", 2.40, 360, -1.4, 0.0),
    ("ground coffee 250 g", 4.20, 420, -1.6, 0.4), ("tea bags 80", 2.30, 500, -0.9, 0.0),
    ("cocoa 250 g", 3.10, 150, -1.5, 0.0), ("cornflakes 500 g", 2.20, 560, -1.3, 0.0),
    ("muesli 750 g", 3.40, 280, -1.6, 0.0), ("dried apricots 500 g", 3.60, 190, -1.4, 0.0),
    ("raisins 500 g", 2.30, 240, -1.1, 0.0), ("walnuts 200 g", 3.90, 170, -1.9, 0.0),
    ("almonds 200 g", 3.70, 210, -1.8, 0.0), ("saffron threads 1 g", 6.50, 25, -1.2, 0.0),
    ("black pepper 100 g", 1.90, 230, -0.7, 0.0), ("paprika 50 g", 1.20, 160, -0.8, 0.0),
    ("vinegar 500 ml", 0.85, 300, -0.6, 0.0), ("soy sauce 150 ml", 1.50, 270, -1.0, 0.0),
    ("stock cubes 10", 1.10, 450, -0.9, 0.0), ("tomato ketchup 500 g", 1.70, 520, -1.1, 0.0),
    ("mayonnaise 400 g", 1.95, 430, -1.2, 0.0), ("mustard 200 g", 1.15, 210, -0.8, 0.0),
    ("coconut milk tin", 1.25, 290, -1.5, 0.0), ("porridge sachets 10", 2.05, 310, -1.4, 0.0),
]
REGION_SCALE = {"North": 1.0, "East": 0.8, "South": 1.2}
FIRST_WEEK = date(2024, 12, 2)
# Produce with a season: the week of the year its season peaks, and how far volume swings over the year.
SEASONAL = {"strawberries 400 g": (26, 0.45), "blueberries 150 g": (30, 0.35), "mangoes 2 pack": (20, 0.40)}


def price_path(rng: np.random.Generator, base: float, weeks: int) -> tuple[np.ndarray, np.ndarray]:
    """List price with occasional changes, plus promotion weeks at 10–30% off; and which weeks those were."""
    level = base * np.exp(np.cumsum(np.where(rng.random(weeks) < 0.08, rng.normal(0, 0.06, weeks), 0.0)))
    promo = rng.random(weeks) < 0.25
    return np.round(level * np.where(promo, 1 - rng.uniform(0.1, 0.3, weeks), 1.0), 2), promo


def demand(rng, price, base, volume, elasticity, curvature, weeks):
    """Constant-elasticity demand, bent by ``curvature``, with seasonality and noise."""
    x = np.log(price / base)
    season = 1 + 0.04 * np.sin(2 * np.pi * np.arange(weeks) / 52 + rng.uniform(0, 2 * np.pi))
    mean = volume * np.exp(elasticity * x - curvature * x * x) * season
    return np.maximum(np.round(mean * rng.lognormal(0, 0.07, weeks)), 0)


def in_season(name: str, weeks: int) -> np.ndarray:
    """(weeks,) between -1 (out of season) and 1 (its peak), by the week of the year."""
    peak, _ = SEASONAL[name]
    week_of_year = (FIRST_WEEK.isocalendar()[1] + np.arange(weeks)) % 52
    return np.cos(2 * np.pi * (week_of_year - peak) / 52)


def series_rows(rng, name, region, base, volume, elasticity, curvature):
    """One series' rows (``rng`` draws the same numbers for every series whatever is added since)."""
    weeks = WEEKS
    price, promo = price_path(rng, base, weeks)
    if name in SEASONAL:  # cheaper in season
        price = np.round(price * (1 - 0.08 * in_season(name, weeks)), 2)
    if name == "table salt 1 kg":
        price = np.round(base * (1 + rng.choice([0, 0, 0, 0.01], weeks)), 2)
    if name == "flour 1 kg" and region == "South":
        price = np.where(np.arange(weeks) < 60, base, base * 1.12).round(2)
    vol = demand(rng, price, base, volume * REGION_SCALE[region], elasticity, curvature, weeks)
    if name in SEASONAL:
        vol = np.round(vol * (1 + SEASONAL[name][1] * in_season(name, weeks)))
    if name == "ground coffee 250 g":  # a display in promotion weeks: volume beyond the price cut's
        vol = np.round(vol * np.where(promo, 1.3, 1.0))
    if name == "truffle oil 250 ml":
        # Promotions ran only in quiet weeks (pulled from the busy ones), so the busy weeks are all at the
        # list price and observed volume rises with price; within promotion weeks, and within the others,
        # it falls.
        vol = np.round(volume * REGION_SCALE[region] * (price / base) ** -1.2 * np.where(promo, 1.0, 2.0)
                       * rng.lognormal(0, 0.08, weeks))
    if name == "lemons 500 g" and region == "East":
        # Straight-line demand: a plan far above history sends the line below zero.
        vol = np.round(volume * REGION_SCALE[region] * (1 - 1.6 * (price / base - 1)) * rng.lognormal(0, 0.05, weeks))
    if name == "cherry tomatoes 250 g" and region == "South":
        vol[70] = vol[70] * 6
    if name == "fresh figs 500 g":
        vol[rng.choice(weeks, 6, replace=False)] = 0
    start = 0
    if name == "saffron threads 1 g" and region == "North":
        start = weeks - 9
    return [(name, region, (FIRST_WEEK + timedelta(weeks=int(w))).isoformat(), f"{price[w]:.2f}", int(vol[w]),
             int(promo[w])) for w in range(start, weeks)]


def main(folder: Path = Path(__file__).parent) -> None:
    rng = np.random.default_rng(SEED)
    rows, plan = [], []
    for name, base, volume, elasticity, curvature in PRODUCTS:
        for region in REGIONS:
            series = series_rows(rng, name, region, base, volume, elasticity, curvature)
            rows += series
            # Plans mostly stay near the usual price; two deliberately leave history far behind.
            usual = float(np.median([float(row[3]) for row in series]))
            planned = usual * rng.choice([1.0, 0.97, 1.03])
            if (name, region) in (("dried apricots 500 g", "East"), ("lemons 500 g", "East")):
                planned = base * (1.9 if name.startswith("dried") else 2.2)
            # A regular week everywhere but the promotion planned for ground coffee in the South.
            promoted = (name, region) == ("ground coffee 250 g", "South")
            plan.append((name, region, f"{planned:.2f}", int(promoted)))
    with open(folder / "wholesale.csv", "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["product", "region", "week", "price", "volume", "promo"])
        writer.writerows(rows)
    with open(folder / "plan.csv", "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["product", "region", "plan_price", "promo"])
        writer.writerows(plan)


if __name__ == "__main__":
    main()
