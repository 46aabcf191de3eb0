"""Benchmark of the batch engine: prints ratios measured in one run.

    python tests/bench/bench_engine.py            # full: 1k, 10k, 100k series
    python tests/bench/bench_engine.py --quick    # 1k and 10k only, smaller 2M-row file skipped
    python tests/bench/bench_engine.py --controls [--series 100000]   # with two controls and --season 2 vs without

Not part of the test suite: these machines are shared and timings are noisy.
Everything is invented data from ``invented.py`` (seeded).
"""
from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

import fitcore  # noqa: E402
from fitcore.review.flags import diagnose  # noqa: E402
from tests.bench.invented import invented_arrays, invented_controlled_dataset, invented_dataset  # noqa: E402


def best_of(fn, repeat=3):
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def polyfit_loop_per_series(data, sample, k=5):
    """Seconds per series for the textbook route: np.polyfit on every fold and degree."""
    def run():
        for s in sample:
            x = data.price[data.offsets[s]:data.offsets[s + 1]]
            y = data.volume[data.offsets[s]:data.offsets[s + 1]]
            folds = np.arange(len(x)) % k
            for d in range(6):
                for f in range(k):
                    train, test = folds != f, folds == f
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        coef = np.polyfit(x[train], y[train], d)
                    np.mean((np.polyval(coef, x[test]) - y[test]) ** 2)
    return best_of(run, 1) / len(sample)


def sklearn_loop_per_series(data, sample):
    from sklearn.linear_model import LinearRegression
    from sklearn.model_selection import KFold, cross_val_score
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import MinMaxScaler, PolynomialFeatures

    def run():
        for s in sample:
            x = data.price[data.offsets[s]:data.offsets[s + 1], None]
            y = data.volume[data.offsets[s]:data.offsets[s + 1]]
            for d in range(6):
                model = make_pipeline(MinMaxScaler((-1, 1)), PolynomialFeatures(d), LinearRegression())
                cross_val_score(model, x, y, cv=KFold(5), scoring="neg_mean_squared_error")
    return best_of(run, 1) / len(sample)


def end_to_end(rows: int, folder: Path):
    n_series = rows // 70
    product, price, volume = invented_arrays(n_series)
    path = folder / "bench.csv"
    import pandas as pd
    pd.DataFrame({"product": np.char.add("item-", product.astype(str)), "price": price,
                  "volume": volume}).to_csv(path, index=False)
    ours = [sys.executable, "-m", "pricefold", "fit", str(path), "-o", str(folder / "out.parquet"), "--quiet"]
    bare = [sys.executable, "-c", f"import pandas; pandas.read_csv({str(path)!r})"]
    t_ours = best_of(lambda: subprocess.run(ours, check=True), 2)
    t_bare = best_of(lambda: subprocess.run(bare, check=True), 2)
    return t_ours, t_bare


def controls_ratio(n: int, repeat: int = 5) -> None:
    """The engine on the same rows with two controls and ``--season 2`` (design columns ≤ 6 → ≤ 12) and
    without, runs interleaved, CPU time (the machine is shared: medians, then the ratio of the medians)."""
    data = invented_controlled_dataset(n)
    plain = fitcore.from_columns({"product": np.repeat(data.keys["product"], data.counts)}, data.price, data.volume,
                                 date=data.date)
    _ = data.key_hash, plain.key_hash
    settings = fitcore.FitSettings(season=2)
    fitcore.fit_batch(invented_controlled_dataset(50), settings)  # compiled before timing
    without, with_controls = [], []
    for _ in range(repeat):
        for runs, fit in ((without, lambda: fitcore.fit_batch(plain)),
                          (with_controls, lambda: fitcore.fit_batch(data, settings))):
            start = time.process_time()
            fit()
            runs.append(time.process_time() - start)
    a, b = float(np.median(without)), float(np.median(with_controls))
    print(f"controls: {n:,} series {data.n_rows:,} rows, all candidates, 5 shuffled folds (CPU time, median of "
          f"{repeat}): without {a:.3f} s (runs {min(without):.3f}–{max(without):.3f}); with promo, a competitor's "
          f"price and --season 2 {b:.3f} s (runs {min(with_controls):.3f}–{max(with_controls):.3f}) → {b / a:.2f}×")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--quick", action="store_true")
    parser.add_argument("--controls", action="store_true", help="only the engine with and without controls")
    parser.add_argument("--series", type=int, default=100_000, help="with --controls: how many series")
    args = parser.parse_args()
    if args.controls:
        controls_ratio(args.series)
        return
    sizes = [1_000, 10_000] if args.quick else [1_000, 10_000, 100_000]
    print("engine: all candidates (poly0–poly5, loglog), 5 shuffled folds, one-se rule; 70 rows a series")
    largest = None
    for n in sizes:
        data = invented_dataset(n)
        _ = data.key_hash
        seconds = best_of(lambda: fitcore.fit_batch(data), 3 if n < 100_000 else 2)
        poly_only = best_of(lambda: fitcore.fit_batch(data, fitcore.FitSettings(loglog=False)), 2)
        series_ids = np.repeat(np.arange(n), data.counts)
        floor = best_of(lambda: np.bincount(series_ids, weights=data.volume, minlength=n), 5)
        results = fitcore.fit_batch(data)
        flags = best_of(lambda: diagnose(results), 2)
        print(f"  {n:>7,} series {data.n_rows:>10,} rows: {seconds:7.3f} s (polynomials only {poly_only:.3f} s); "
              f"one-pass bincount floor {floor * 1000:.1f} ms → {seconds / floor:.0f}× the floor; "
              f"diagnostics {flags:.3f} s = {flags / seconds:.0%} on top")
        largest = (n, data, seconds)
    n, data, seconds = largest
    rng = np.random.default_rng(0)
    per_polyfit = polyfit_loop_per_series(data, rng.choice(n, 200, replace=False))
    per_sklearn = sklearn_loop_per_series(data, rng.choice(n, 10, replace=False))
    print(f"per-series loops, extrapolated to {n:,} series from a subsample:")
    print(f"  numpy.polyfit, 6 degrees × 5 folds: {per_polyfit * 1e3:.2f} ms a series → {per_polyfit * n:.1f} s; "
          f"engine is {per_polyfit * n / seconds:.0f}× faster")
    print(f"  scikit-learn cross_val_score, 6 degrees: {per_sklearn * 1e3:.1f} ms a series → {per_sklearn * n:.0f} s; "
          f"engine is {per_sklearn * n / seconds:.0f}× faster")
    if not args.quick:
        with tempfile.TemporaryDirectory() as folder:
            t_ours, t_bare = end_to_end(2_000_000, Path(folder))
        print(f"end to end on a 2,000,000-row CSV (whole processes): pricefold fit {t_ours:.2f} s, "
              f"pandas.read_csv alone {t_bare:.2f} s → ratio {t_ours / t_bare:.2f}")


if __name__ == "__main__":
    main()
