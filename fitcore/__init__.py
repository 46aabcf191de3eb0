"""pricefold's numerical core: load price–volume series, fit and cross-validate
demand curves for all of them at once, choose one per series, predict at a plan price.

Pure computation and file I/O only: nothing here imports a user interface.
"""
from .errors import DataError, PricefoldError, SettingsError
from .settings import FitSettings

__all__ = ["SCHEMA", "DataError", "Dataset", "FitSettings", "PricefoldError", "Results", "SettingsError",
           "fit_batch", "from_columns"]

_LAZY = {"Dataset": "dataset", "from_columns": "dataset", "fit_batch": "engine", "Results": "results",
         "SCHEMA": "results"}


def __getattr__(name: str):
    """The engine and the dataset on first use: ``import fitcore`` stays cheap (no pandas, no numba)."""
    if name in _LAZY:
        from importlib import import_module
        return getattr(import_module(f".{_LAZY[name]}", __name__), name)
    raise AttributeError(f"module 'fitcore' has no attribute {name!r}")
