"""Curve families, one module each, all keeping the contract of ``base.Family``.

    poly       volume = Σ cₖ·tᵏ, t the price mapped onto [-1, 1]; degrees 0–5
    loglog     ln volume = a + e·ln price (constant elasticity)
    semilog    ln volume = a + b·price (constant semi-elasticity; off unless asked for)

``FAMILIES`` lists them in the order their candidates appear; a ``Lineup``
is the families a fit uses, each with the columns of its candidates.
Everything outside this package loops over a lineup.
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from .base import Candidate, Family, Fitted
from .loglog import LogLog
from .poly import Polynomial
from .semilog import SemiLog

FAMILIES: tuple[Family, ...] = (Polynomial(), LogLog(), SemiLog())
BY_NAME = {family.name: family for family in FAMILIES}

__all__ = ["BY_NAME", "FAMILIES", "Candidate", "Family", "Fitted", "Lineup", "candidates_for", "lineup_for"]


@dataclass(frozen=True, eq=False)
class Lineup:
    """The candidates of a fit and the families they come from.  ``groups``: (family, columns) in
    candidate order, ``columns`` a slice of the candidate axis; families without candidates are left out."""

    candidates: tuple[Candidate, ...]
    groups: tuple[tuple[Family, slice], ...]

    @classmethod
    def of(cls, candidates) -> "Lineup":
        candidates = tuple(candidates)
        groups, start = [], 0
        for family in FAMILIES:
            count = sum(1 for c in candidates if c.family == family.name)
            if count:
                groups.append((family, slice(start, start + count)))
                start += count
        if [c.family for c in candidates] != [f.name for f, cols in groups for _ in range(cols.stop - cols.start)]:
            raise ValueError(f"candidates out of family order: {[c.name for c in candidates]}")
        return cls(candidates, tuple(groups))

    @cached_property
    def width(self) -> int:
        """Coefficients of the widest candidate: the last axis of every coefficient array."""
        return max((c.complexity for c in self.candidates), default=1)

    @cached_property
    def complexity(self) -> np.ndarray:
        return np.array([c.complexity for c in self.candidates], dtype=np.int64)

    def family_of(self, c: int) -> Family:
        return BY_NAME[self.candidates[c].family]

    def members(self, family_index: int) -> tuple[Candidate, ...]:
        return self.candidates[self.groups[family_index][1]]


def lineup_for(settings) -> Lineup:
    return Lineup.of(c for family in FAMILIES for c in family.candidates(settings))


def candidates_for(settings) -> tuple[Candidate, ...]:
    return lineup_for(settings).candidates
