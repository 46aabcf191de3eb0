"""Which input columns hold what, a data file's digest, and whether a name is Parquet's: light enough to
import anywhere."""
from __future__ import annotations

import hashlib
import re
from dataclasses import dataclass
from pathlib import Path

PARQUET_SUFFIXES = (".parquet", ".pq")
# The largest magnitude of a price, volume or control the arithmetic carries: sums of squared volumes
# (CV errors, intervals) and revenue = price × volume over millions of rows must stay far inside float64
# (1e308); past about 1e154 a square is infinite and a series silently gets no model.  1e15 is also
# below 2**53, so whole numbers up to it are exact; no real price or weekly volume comes near it.
# Here (light to import) for the plan price of the options as well as the readers (``validation``).
LARGEST = 1e15


@dataclass(frozen=True)
class Columns:
    """Which input columns hold what."""

    product: str = "product"
    segments: tuple[str, ...] = ()
    price: str = "price"
    volume: str = "volume"
    date: str | None = None
    weight: str | None = None
    controls: tuple[str, ...] = ()  # other drivers of volume, held fixed while price curves are fitted

    @property
    def keys(self) -> tuple[str, ...]:
        return (self.product, *self.segments)

    def as_dict(self) -> dict:
        out = {"product": self.product, "segments": list(self.segments), "price": self.price,
               "volume": self.volume, "date": self.date, "weight": self.weight}
        return out | ({"controls": list(self.controls)} if self.controls else {})

    @classmethod
    def from_dict(cls, values: dict) -> "Columns":
        return cls(product=values["product"], segments=tuple(values.get("segments", ())), price=values["price"],
                   volume=values["volume"], date=values.get("date"), weight=values.get("weight"),
                   controls=tuple(values.get("controls", ())))

    @property
    def needed(self) -> list[str]:
        extra = [c for c in (self.date, self.weight) if c]
        return list(dict.fromkeys([*self.keys, self.price, self.volume, *extra, *self.controls]))


# each role as a command line names it: (role, its flag, one of its columns called)
_ROLES = (("product", "--product", "the product"), ("segments", "--segment", "a segment"),
          ("price", "--price", "the price"), ("volume", "--volume", "the volume"), ("date", "--date", "the date"),
          ("weight", "--weight", "the weight"), ("controls", "--control", "a control"))


def check_roles(columns: Columns) -> None:
    """Every role names a column of its own: price and volume read from one column (``--price volume``), a
    segment that is the product or the date column, a control that is the price column fit nonsense without
    a word.  ``SettingsError`` naming both options (a later role's default counts: ``--price volume`` alone
    meets ``--volume``'s default, volume)."""
    from ..errors import SettingsError
    seen: dict[str, tuple[str, str]] = {}  # column → (flag, words) of the role that took it first
    for role, flag, words in _ROLES:
        value = getattr(columns, role)
        for name in value if isinstance(value, tuple) else (value,) if value is not None else ():
            if name not in seen:
                seen[name] = (flag, words)
            elif seen[name][0] == flag:
                raise SettingsError(f"{flag} {name} is given twice; name each {words[2:]} column once")
            elif role == "controls":
                raise SettingsError(f"--control {name} is already {seen[name][1]} column; a control is another column")
            else:
                raise SettingsError(f"{seen[name][0]} and {flag} both name the column {name}: {seen[name][1]} and "
                                    f"{words} must be columns of their own")


def file_sha256(path: Path) -> str:
    digest = hashlib.sha256()
    if path.is_dir():
        for part in sorted(path.rglob("*.parquet")):
            digest.update(file_sha256(part).encode())
        return digest.hexdigest()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


# how a JSON results file begins (white space allowed where JSON allows it): told from data and from other JSON
RESULTS_JSON = re.compile(rb'\s*\{\s*"schema"\s*:\s*"pricefold-results/')


def is_parquet_name(path: str | Path) -> bool:
    """Does the name end in .parquet or .pq (any case)?"""
    return Path(path).suffix.lower() in PARQUET_SUFFIXES
