"""pricefold's numerical core: load price–volume series, fit and cross-validate
demand curves for all of them at once, choose one per series, predict at a plan price.

Pure computation and file I/O only: nothing here imports a user interface.
The rooms, in the order they may import one another (each imports only the
rooms before it, and the shared modules ``errors``, ``text``, ``compiled``,
``arrays`` at this level):

    data     columns, readers, row validation, the Dataset, plan prices, the settings file, series keys
    fit      fit settings, fold schemes, curve families (one module each), the compiled
             least-squares loops, scores, selection, the engine (``fit_batch``) and its ``Results``
    review   flag thresholds, flags and their sentences, the shared number formats, influence, evidence for charts
    results  results files: writers, readers, stored (Arrow-backed) results
    ledger   the chained sign-off ledger and its replay into statuses
    scale    the batch engine on a Dask cluster
"""
from .errors import DataError, PricefoldError, SettingsError
from .fit.settings import FitSettings

__all__ = ["SCHEMA", "Columns", "DataError", "Dataset", "FitSettings", "PricefoldError", "Results", "SettingsError",
           "diagnose", "fit_batch", "from_columns", "load"]

_LAZY = {"Columns": "data.columns", "Dataset": "data.dataset", "from_columns": "data.dataset", "load": "data.loader",
         "fit_batch": "fit.engine", "Results": "fit.results", "SCHEMA": "fit.results", "diagnose": "review.flags"}


def __getattr__(name: str):
    """The engine and the dataset on first use: ``import fitcore`` stays cheap (no pandas, no numba)."""
    if name in _LAZY:
        from importlib import import_module
        return getattr(import_module(f".{_LAZY[name]}", __name__), name)
    raise AttributeError(f"module 'fitcore' has no attribute {name!r}")
