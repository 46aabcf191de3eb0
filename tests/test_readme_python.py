"""The README's "From Python" section runs as written (from the repository's root, as a reader would)."""
from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def readme_snippet() -> str:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("## From Python", 1)[1].split("\n## ", 1)[0]
    return re.search(r"```python\n(.*?)```", section, re.S).group(1)


def test_the_from_python_section_runs_as_written():
    code = readme_snippet()
    checks = ("\nassert results.names[-1] == 'semilog' and len(results.chosen) == 180"
              "\nassert sum(diagnosis.counts().values()) > 0 and len(diagnosis.attention_order()) == 180"
              "\nprint('ran')")
    done = subprocess.run([sys.executable, "-c", code + checks], cwd=ROOT, capture_output=True, text=True)
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout.strip().endswith("ran")
