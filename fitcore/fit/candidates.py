"""The curve shapes each series chooses between."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .settings import FitSettings


@dataclass(frozen=True)
class Candidate:
    """One curve shape.  ``complexity`` is its number of coefficients."""

    name: str
    family: str
    degree: int | None
    complexity: int


def candidates_for(settings: FitSettings) -> tuple[Candidate, ...]:
    polys = tuple(Candidate(f"poly{d}", "poly", d, d + 1) for d in settings.degrees)
    return polys + ((Candidate("loglog", "loglog", None, 2),) if settings.loglog else ())


def complexity(candidates: tuple[Candidate, ...]) -> np.ndarray:
    return np.array([c.complexity for c in candidates], dtype=np.int64)
