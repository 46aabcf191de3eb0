"""The invented scenario one or more weeks later: every series gets new weekly rows after its latest.

    python sample/next_week.py OUT.csv [--weeks 1] [--from sample/wholesale.csv]

Each new week's price is the series' last price (a promotion at 10–30% off one week in four, marked in the
``promo`` column where the data has one), and its
volume comes from the same invented demand as ``generate.py`` (the product's base volume, elasticity
and curvature, the region's scale, noise).  A series ``generate.py`` does not invent (a product renamed, a
region added) gets a plain rule instead: that demand around its own mean price and mean volume, elasticity
-1, no curvature, scale 1 (drawing as many random numbers as any other series, so the others' new rows stay
as they were).  Seeded: the same output on every run.  Used to show and
test a planning cycle after sign-off (README, "Each cycle"); everything in it is invented.
"""
from __future__ import annotations

import argparse
import csv
from datetime import date, timedelta
from pathlib import Path

import numpy as np

from generate import PRODUCTS, REGION_SCALE, demand

SEED = 20261209


def extend(source: Path, target: Path, weeks: int = 1, seed: int = SEED) -> int:
    """Write ``source`` plus ``weeks`` new rows per series to ``target``; returns the rows added."""
    rng = np.random.default_rng(seed)
    with open(source, newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    header, body = rows[0], rows[1:]
    last: dict[tuple[str, str], list[str]] = {}  # each series' latest row by date, whatever the file's order
    for row in body:
        known = last.get((row[0], row[1]))
        if known is None or row[2] >= known[2]:  # ISO dates compare as text
            last[(row[0], row[1])] = row
    levels = None
    params = {name: (base, volume, elasticity, curvature) for name, base, volume, elasticity, curvature in PRODUCTS}
    added = []
    for (name, region), row in last.items():
        if name in params and region in REGION_SCALE:
            base, volume, elasticity, curvature = params[name]
            volume *= REGION_SCALE[region]
        else:
            levels = levels or own_levels(body)
            base, volume, elasticity, curvature = *levels[(name, region)], -1.0, 0.0
        day = date.fromisoformat(row[2])
        for w in range(1, weeks + 1):
            promo = rng.random() < 0.25
            price = round(float(row[3]) * (1 - rng.uniform(0.1, 0.3) if promo else 1.0), 2)
            vol = demand(rng, np.array([price]), base, volume, elasticity, curvature, 1)
            cells = [name, region, (day + timedelta(weeks=w)).isoformat(), f"{price:.2f}", int(vol[0])]
            added.append(cells + [int(promo)] * (len(header) - len(cells)))  # the promo column, where the data has it
    with open(target, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(header)
        writer.writerows(body + added)
    return len(added)


def own_levels(body: list[list[str]]) -> dict[tuple[str, str], tuple[float, float]]:
    """Each series' mean price and mean volume over its rows that hold both as numbers above zero (a
    price and volume 1 when none does)."""
    sums: dict[tuple[str, str], list[float]] = {}
    for row in body:
        total = sums.setdefault((row[0], row[1]), [0.0, 0.0, 0.0])
        try:
            price, volume = float(row[3]), float(row[4])
        except (ValueError, IndexError):
            continue
        if price > 0 and volume > 0:
            total[0], total[1], total[2] = total[0] + 1, total[1] + price, total[2] + volume
    return {key: (p / n, v / n) if n else (1.0, 1.0) for key, (n, p, v) in sums.items()}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("output", type=Path)
    parser.add_argument("--weeks", type=int, default=1)
    parser.add_argument("--from", dest="source", type=Path, default=Path(__file__).parent / "wholesale.csv")
    args = parser.parse_args()
    print(f"{extend(args.source, args.output, args.weeks)} rows added → {args.output}")


if __name__ == "__main__":
    main()
