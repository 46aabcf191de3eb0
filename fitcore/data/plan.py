"""Plan prices per series, read from a file of key columns + ``plan_price``."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from ..errors import DataError
from .dataset import Dataset
from .loader import Columns, read_rows


def plan_prices(data: Dataset, path: str | Path, sep: str | None = None, *, partial: bool = False) -> np.ndarray:
    """(S,) the plan price of each series, NaN where the file names none.

    Every row must name a series of ``data`` with a price above zero, once.
    ``partial``: ``data`` holds only some of the series (one partition), so rows naming
    other series are passed over rather than refused.
    """
    path = Path(path)
    keys = list(data.key_names)
    columns = Columns(product=keys[0], segments=tuple(keys[1:]), price="plan_price", volume="plan_price")
    rows, _, _ = read_rows(path, columns, sep)
    price, not_number, _ = rows.numbers["plan_price"]
    bad = not_number | ~np.isfinite(price) | (price <= 0)
    if bad.any():
        first = int(np.argmax(bad))
        raise DataError("expected a price above zero", path=str(path), line=int(rows.line[first]), column="plan_price")
    table = pd.DataFrame({name: np.asarray(rows.keys[name], dtype=object).astype(str) for name in keys})
    dup = table.duplicated().to_numpy()
    if dup.any():
        first = int(np.argmax(dup))
        raise DataError("this series already has a plan price on an earlier line", path=str(path),
                        line=int(rows.line[first]))
    series = pd.DataFrame({name: data.keys[name].astype(str) for name in keys})
    series["_s"] = np.arange(data.n_series)
    merged = table.merge(series, on=keys, how="left")
    unknown = merged["_s"].isna().to_numpy()
    if partial:
        merged, price = merged[~unknown], price[~unknown]
    elif unknown.any():
        first = int(np.argmax(unknown))
        names = ", ".join(f"{k}={merged[k].iloc[first]!r}" for k in keys)
        raise DataError(f"no series in the data has this key ({names})", path=str(path), line=int(rows.line[first]))
    out = np.full(data.n_series, np.nan)
    out[merged["_s"].to_numpy(np.int64)] = price
    return out
