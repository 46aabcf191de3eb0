"""The numerical core never pulls in the user interface."""
from __future__ import annotations

import subprocess
import sys


def test_importing_fitcore_loads_no_ui_library():
    code = ("import sys, fitcore, fitcore.data.loader, fitcore.results.write, fitcore.data.plan; "
            "print(sorted(m for m in sys.modules if m.split('.')[0] in ('textual', 'rich', 'tui', 'plotext')))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"


def test_the_fit_command_loads_no_ui_library():
    code = ("import sys; from pricefold import cli; cli.build_parser(); "
            "print(sorted(m for m in sys.modules if m.split('.')[0] in ('textual', 'rich', 'tui', 'plotext')))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"
