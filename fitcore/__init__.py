"""pricefold's numerical core: load price–volume series, fit and cross-validate
demand curves for all of them at once, choose one per series, predict at a plan price.

Pure computation and file I/O only: nothing here imports a user interface.
"""
from .dataset import Dataset, from_columns
from .engine import fit_batch
from .errors import DataError, PricefoldError, SettingsError
from .results import SCHEMA, Results
from .settings import FitSettings

__all__ = ["Dataset", "from_columns", "fit_batch", "FitSettings", "Results", "SCHEMA",
           "PricefoldError", "DataError", "SettingsError"]
