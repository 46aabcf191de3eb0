"""The lines ``pricefold fit`` prints when it is done, shared by the local and the Dask engine."""
from __future__ import annotations

from pathlib import Path


def summary_line(n_series: int, n_rows: int, chosen: dict, flags: dict, clean: int, how: str, where: str) -> str:
    """'fitted 180 series (18,625 rows) in 0.41 s; chosen: …\nflags: …; 159 series (88%) carry none → OUT'."""
    parts = " · ".join(f"{name} {count:,}" for name, count in chosen.items() if count)
    flagged = " · ".join(f"{code} {count:,}" for code, count in flags.items()) or "none"
    share = clean / n_series if n_series else 1.0
    return (f"fitted {n_series:,} series ({n_rows:,} row{'s' * int(n_rows != 1)}) {how}; chosen: {parts}\n"
            f"flags: {flagged}; {clean:,} series ({share:.0%}) carry none → {where}")


def rejects_line(reasons: list[str], where: Path, read: int, first: str = "") -> str:
    """'3 rows rejected: 1 negative price · … — see r.rejects.csv'; ``read``: the rows read, so that a run
    fitting what little is left of a misread file (a wrong delimiter, decimal commas) says so, with
    ``first``: where the first rejected row is and why (``loader.first_rejected``)."""
    from fitcore.data.validation import misread, summary
    most = misread(reasons, read, first)
    return f"{summary(reasons)} — see {where}{most}{' (--strict fails such a run)' if most else ''}"
