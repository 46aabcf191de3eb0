"""The help text: keys, what the flags mean, and the cautions."""
from __future__ import annotations

from rich.text import Text

from fitcore.review.flags import FLAGS

KEYS = [
    ("↑ ↓ PgUp PgDn Home End", "move in the list"),
    ("] [", "next / previous series needing attention"),
    ("Tab", "switch between the list and the evidence (narrow screens show one at a time)"),
    ("a", "accept the proposed curve"),
    ("o", "override: choose another candidate (a note is required)"),
    ("n", "add a note"),
    ("h", "hold: park the series for follow-up"),
    ("u", "withdraw your own latest decision on this series"),
    ("/", "search by key"),
    ("f", "filter: needs attention, all, pending, decided, or one flag"),
    ("s", "sort: attention, key, lowest score, fewest observations"),
    ("?", "this help"),
    ("q", "quit (every decision is already in the ledger)"),
]

CAUTIONS = ("Cautions. Curves fitted to observational sales data confound price with promotions, seasons, "
            "stock-outs and competitors' moves: they describe what happened, not what a price change will "
            "cause. A prediction at a price outside the prices a series has seen is an extrapolation. "
            "pricefold proposes a curve; you decide, and the ledger records that you did.")


def help_text() -> Text:
    text = Text("Keys\n", style="bold")
    for keys, meaning in KEYS:
        text.append(f"  {keys:<24}", style="bold")
        text.append(f"{meaning}\n")
    text.append("\nFlags\n", style="bold")
    for code, severity, meaning in FLAGS:
        text.append(f"  {code:<18}", style="bold")
        text.append(f"{severity:<5} {meaning}\n")
    text.append("\nStatus marks: · pending  ✓ accepted  ↺ overridden  ‖ held  ! stale (data changed since)\n")
    text.append("\n" + CAUTIONS + "\n", style="italic")
    return text
