"""Fit settings: one frozen object, validated where it is built."""
from __future__ import annotations

from dataclasses import asdict, dataclass, field

from ..errors import SettingsError

MAX_DEGREE = 5
RULES = ("one-se", "lowest")


@dataclass(frozen=True)
class FitSettings:
    """Everything that decides how series are fitted and a candidate chosen.

    ``folds`` is a whole number K ≥ 2 or the string ``"loo"`` (leave-one-out,
    exact from the hat matrix).  ``fold_order`` is how rows are dealt into K
    folds: ``given`` (contiguous blocks in file order), ``shuffled`` (seeded),
    or ``time`` (rolling origin on the date column).
    """

    degrees: tuple[int, ...] = (0, 1, 2, 3, 4, 5)
    loglog: bool = True
    semilog: bool = False
    folds: int | str = 5
    fold_order: str = "shuffled"
    seed: int = 0
    rule: str = "one-se"
    level: float = 0.95
    extra: dict = field(default_factory=dict, compare=False)

    def __post_init__(self) -> None:
        if not self.degrees:
            raise SettingsError("expected at least one polynomial degree, got none")
        if list(self.degrees) != sorted(set(self.degrees)):
            raise SettingsError(f"expected distinct degrees in increasing order, got {list(self.degrees)}")
        if self.degrees[0] < 0 or self.degrees[-1] > MAX_DEGREE:
            raise SettingsError(f"expected degrees between 0 and {MAX_DEGREE}, got {list(self.degrees)}")
        from .folds import fold_scheme
        fold_scheme(self)  # folds, fold order and seed are checked by the scheme they make
        if self.rule not in RULES:
            raise SettingsError(f"expected --rule to be one of {', '.join(RULES)}, got {self.rule!r}")
        if not 0.5 < self.level < 1:
            raise SettingsError(f"expected the interval level between 0.5 and 1, got {self.level}")
        if not isinstance(self.seed, int) or self.seed < 0:
            raise SettingsError(f"expected --seed to be a non-negative whole number, got {self.seed!r}")

    def as_dict(self) -> dict:
        out = asdict(self)
        out.pop("extra")
        out["degrees"] = list(self.degrees)
        return out | dict(self.extra)


def provenance(columns: dict, plan_file: str | None, plan_price: float | None) -> dict:
    """What a results file records beyond the fit settings, so the same fit can be made again."""
    plan = {"file": plan_file} if plan_file else {"price": plan_price} if plan_price is not None else None
    return {"columns": columns, "plan": plan}


def settings_from_dict(values: dict) -> FitSettings:
    """The ``FitSettings`` recorded in a results file (extra entries kept in ``extra``)."""
    known = {"degrees", "loglog", "semilog", "folds", "fold_order", "seed", "rule", "level"}
    return FitSettings(degrees=tuple(values["degrees"]), loglog=values["loglog"],
                       semilog=values.get("semilog", False), folds=values["folds"],
                       fold_order=values["fold_order"], seed=values["seed"], rule=values["rule"],
                       level=values["level"], extra={k: v for k, v in values.items() if k not in known})


def parse_degrees(text: str) -> tuple[int, ...]:
    """``"0-5"`` → (0, …, 5); ``"1,3"`` → (1, 3)."""
    try:
        if "-" in text:
            lo, hi = (int(part) for part in text.split("-", 1))
            degrees = tuple(range(lo, hi + 1))
        else:
            degrees = tuple(sorted({int(part) for part in text.split(",")}))
    except ValueError:
        raise SettingsError(f"expected --degrees like 0-5 or 1,2,3, got {text!r}") from None
    if not degrees:
        raise SettingsError(f"expected --degrees like 0-5 or 1,2,3, got {text!r}")
    return degrees


def parse_folds(text: str) -> int | str:
    if text.strip().lower() == "loo":
        return "loo"
    try:
        return int(text)
    except ValueError:
        raise SettingsError(f"expected --folds to be a whole number of at least 2 or 'loo', got {text!r}") from None
