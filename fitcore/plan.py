"""Plan prices per series, read from a file of key columns + ``plan_price``."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from .dataset import Dataset
from .errors import DataError
from .loader import Columns, read_table


def plan_prices(data: Dataset, path: str | Path, sep: str | None = None) -> np.ndarray:
    """(S,) the plan price of each series, NaN where the file names none.

    Every row must name a series of ``data`` with a positive price, once.
    """
    path = Path(path)
    columns = Columns(product=data.key_names[0], segments=data.key_names[1:], price="plan_price", volume="plan_price")
    table = read_table(path, columns, sep).to_pandas()
    keys = list(data.key_names)
    price = table["plan_price"].to_numpy(np.float64)
    bad = ~np.isfinite(price) | (price <= 0)
    if bad.any():
        line = int(np.argmax(bad)) + 2
        raise DataError(f"expected a price above zero, got {table['plan_price'].iloc[line - 2]!r}",
                        path=str(path), line=line, column="plan_price")
    dup = table.duplicated(keys)
    if dup.any():
        line = int(np.argmax(dup.to_numpy())) + 2
        raise DataError("this series already has a plan price on an earlier line", path=str(path), line=line)
    series = pd.DataFrame({name: data.keys[name].astype(str) for name in keys})
    series["_s"] = np.arange(data.n_series)
    merged = table.astype({name: str for name in keys}).merge(series, on=keys, how="left")
    unknown = merged["_s"].isna().to_numpy()
    if unknown.any():
        line = int(np.argmax(unknown)) + 2
        raise DataError(f"no series in the data has this key ({', '.join(f'{k}={merged[k].iloc[line - 2]!r}' for k in keys)})",
                        path=str(path), line=line)
    out = np.full(data.n_series, np.nan)
    out[merged["_s"].to_numpy(np.int64)] = merged["plan_price"].to_numpy(np.float64)
    return out
