"""Count how a copy of pricefold fares on the hostile corpus: cases tried, tracebacks, data lost.

    python tests/hostile/tally.py [--source DIR]   # DIR: another checkout to run (default: this one)

Every case runs in a subprocess (so hangs and native aborts are seen).  Not a test: a report for notes.
"""
from __future__ import annotations

import argparse
import sys
import tempfile
from collections import Counter
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.hostile.cases import CASES  # noqa: E402
from tests.hostile.harness import cleanup, run_case  # noqa: E402


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--source", default=str(Path(__file__).resolve().parents[2]))
    parser.add_argument("--only", default="", help="run only cases whose id contains this")
    args = parser.parse_args()
    root = Path(tempfile.mkdtemp(prefix="pricefold-tally-"))
    root.chmod(0o755)
    counts = Counter()
    try:
        for case in CASES:
            if args.only not in case.id:
                continue
            outcome = run_case(case._replace(how="subprocess" if case.how == "in-process" else case.how), root,
                               python_path=args.source)
            counts["tried"] += 1
            problems = []
            if outcome.traceback:
                problems.append("traceback")
            if outcome.changed:
                problems.append(f"data lost {outcome.changed}")
            if outcome.new_after_failure:
                problems.append(f"left behind {outcome.new_after_failure}")
            if outcome.code != case.code:
                problems.append(f"exit {outcome.code} (want {case.code})")
            elif case.code and outcome.stderr_lines != 1:
                problems.append(f"{outcome.stderr_lines} stderr lines")
            if outcome.failed_checks:
                problems.append(f"checks {outcome.failed_checks}")
            for kind in ("traceback", "data lost", "left behind", "exit", "stderr lines", "checks"):
                if any(p.startswith(kind) or kind in p for p in problems):
                    counts[kind] += 1
            if problems:
                counts["cases with a problem"] += 1
                last = outcome.stderr.strip().splitlines()[-1:] or [""]
                print(f"{case.id}: {'; '.join(problems)} | {last[0][:160]}", flush=True)
    finally:
        cleanup(root)
    print(dict(counts))


if __name__ == "__main__":
    main()
