"""Run one failing ``pricefold fit`` many times at once and count how each run ended.

    python tests/hostile/repeat_exit.py [--runs 200] [--at-once 3] [--source DIR]

The command: data with one non-numeric volume (the fast reader fails and hands the file to the
line-by-line reader) and a plan naming an unknown product (exit 2).  It once aborted at exit in about
1 run in 10 under load ("terminate called without an active exception", exit 134): pyarrow's worker
threads released the Python row handler pricefold had given the reader while the interpreter was
shutting down.  Several runs at once make the machine busy, as when the abort was seen.
"""
from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
from collections import Counter
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

ROWS = ["product,price,volume"] + [f"a,{1 + i / 10:.1f},{30 - i}" for i in range(20)] + ["a,2.5,lots"]


def one_run(folder: Path, i: int, python_path: str | None) -> tuple[int, str]:
    env = dict(os.environ, **({"PYTHONPATH": python_path} if python_path else {}))
    done = subprocess.run([sys.executable, "-m", "pricefold", "fit", "d.csv", "--plan", "plan.csv", "-o",
                           f"r{i}.json"], cwd=folder, capture_output=True, text=True, env=env, timeout=300)
    return done.returncode, done.stderr


def main(argv=None) -> Counter:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--runs", type=int, default=200)
    parser.add_argument("--at-once", type=int, default=3)
    parser.add_argument("--source", default=None, help="another checkout of pricefold to run (PYTHONPATH)")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as name:
        folder = Path(name)
        (folder / "d.csv").write_text("\n".join(ROWS) + "\n")
        (folder / "plan.csv").write_text("product,plan_price\nzzz,2.0\n")
        with ThreadPoolExecutor(args.at_once) as pool:
            ends = list(pool.map(lambda i: one_run(folder, i, args.source), range(args.runs)))
    counts = Counter(code for code, _ in ends)
    odd = [err for code, err in ends if code != 2 or "Traceback" in err or "terminate called" in err]
    print(f"{args.runs} runs, {args.at_once} at once: exit statuses {dict(counts)}; "
          f"{len(odd)} ended other than with exit 2 and one line")
    for err in odd[:3]:
        print("  e.g.", err.strip().splitlines()[-1:])
    return counts


if __name__ == "__main__":
    main()
