"""Which input columns hold what, a data file's digest, and whether a name is Parquet's: light enough to
import anywhere."""
from __future__ import annotations

import hashlib
from dataclasses import dataclass
from pathlib import Path

PARQUET_SUFFIXES = (".parquet", ".pq")


@dataclass(frozen=True)
class Columns:
    """Which input columns hold what."""

    product: str = "product"
    segments: tuple[str, ...] = ()
    price: str = "price"
    volume: str = "volume"
    date: str | None = None
    weight: str | None = None

    @property
    def keys(self) -> tuple[str, ...]:
        return (self.product, *self.segments)

    def as_dict(self) -> dict:
        return {"product": self.product, "segments": list(self.segments), "price": self.price,
                "volume": self.volume, "date": self.date, "weight": self.weight}

    @classmethod
    def from_dict(cls, values: dict) -> "Columns":
        return cls(product=values["product"], segments=tuple(values.get("segments", ())), price=values["price"],
                   volume=values["volume"], date=values.get("date"), weight=values.get("weight"))

    @property
    def needed(self) -> list[str]:
        extra = [c for c in (self.date, self.weight) if c]
        return list(dict.fromkeys([*self.keys, self.price, self.volume, *extra]))


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


def is_parquet_name(path: str | Path) -> bool:
    """Does the name end in .parquet or .pq (any case)?"""
    return Path(path).suffix.lower() in PARQUET_SUFFIXES
