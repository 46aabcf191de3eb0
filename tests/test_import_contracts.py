"""Static import contracts (``[tool.importlinter]`` in pyproject.toml), checked by import-linter.

The layers of ``fitcore`` (scale > ledger > results > review > fit > data), no
user interface in ``fitcore``, and no import circle among the modules of a
package: a circle the day it appears fails the suite.  Beside the runtime
check in ``test_layers.py``.
"""
from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def lint_imports(where: Path) -> subprocess.CompletedProcess:
    command = shutil.which("lint-imports", path=str(Path(sys.executable).parent)) or "lint-imports"
    return subprocess.run([command, "--no-cache"], cwd=where, capture_output=True, text=True,
                          env={"PATH": str(Path(sys.executable).parent), "PYTHONPATH": str(where)})


def test_the_import_contracts_are_kept():
    done = lint_imports(ROOT)
    assert done.returncode == 0, done.stdout[-3000:] + done.stderr[-2000:]
    assert "Contracts: 4 kept, 0 broken." in done.stdout


def test_an_upward_import_and_a_circle_break_them(tmp_path):
    """The same contracts on a copy in which the fitting room imports the review room."""
    for package in ("fitcore", "tui", "pricefold"):
        shutil.copytree(ROOT / package, tmp_path / package, ignore=shutil.ignore_patterns("__pycache__"))
    shutil.copy(ROOT / "pyproject.toml", tmp_path / "pyproject.toml")
    basis = tmp_path / "fitcore" / "fit" / "basis.py"
    basis.write_text(basis.read_text() + "\nfrom ..review import flags  # noqa: E402,F401\n")
    done = lint_imports(tmp_path)
    assert done.returncode != 0
    assert "fitcore.fit is not allowed to import fitcore.review" in done.stdout
    assert "No cycles are allowed in fitcore" in done.stdout
