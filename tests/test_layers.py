"""The numerical core never pulls in the user interface."""
from __future__ import annotations

import subprocess
import sys

import pytest


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


def test_the_report_loads_no_ui_library(tmp_path):
    """A report on the bundled sample, in a fresh interpreter: the triage screen's libraries stay out."""
    from pathlib import Path
    sample = Path(__file__).resolve().parents[1] / "sample"
    results = tmp_path / "results.parquet"
    code = ("import sys; from pricefold import cli; "
            f"assert cli.main(['fit', {str(sample / 'wholesale.csv')!r}, '--segment', 'region', '--date', 'week', "
            f"'--plan', {str(sample / 'plan.csv')!r}, '-o', {str(results)!r}, '--quiet']) == 0; "
            f"assert cli.main(['report', {str(results)!r}, '-o', {str(tmp_path / 'report.html')!r}]) == 0; "
            "print(sorted({m.split('.')[0] for m in sys.modules if m.split('.')[0] in "
            "('textual', 'rich', 'tui', 'plotext')}))")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=tmp_path)
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout.strip().splitlines()[-1] == "[]"
    assert (tmp_path / "report.html").stat().st_size > 0


def test_building_the_parser_loads_no_ledger_code():
    """Every run builds the whole parser, the ledger commands' included: their arguments live apart from the
    ledger's code (``ledger_options``), so a ``fit`` that never opens a ledger does not import it (0.05–0.07 s)."""
    code = ("import sys, pricefold.cli as cli; cli.build_parser(); "
            "print(sorted(m for m in sys.modules if m.startswith(('fitcore.ledger', 'pricefold.ledger_cli', "
            "'pricefold.cycle_cli', 'pricefold.carry_cli', 'pricefold.fit_ledger', 'pricefold.show'))))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"


def test_a_plain_fit_imports_neither_pandas_nor_scipy_linalg(tmp_path):
    """A fit of one key column, Parquet or CSV in, Parquet or JSON out, never imports pandas (0.15–0.36 s of CPU
    at start-up): the results' Arrow columns are made from their buffers (``pyarrow.array``, ``pyarrow.scalar``
    and any ``pyarrow.compute`` call given a Python value import it), and the warm-up thread no longer does.
    Nor ``scipy.linalg`` (0.1–0.16 s), which numba's check for a BLAS imported as it loaded (``compiled``):
    its answer stays numba's own, and numba's check is back in place after."""
    import pyarrow.csv as csv
    import pyarrow.parquet as pq
    from pathlib import Path
    sample = Path(__file__).resolve().parents[1] / "sample" / "wholesale.csv"
    data = tmp_path / "rows.parquet"
    pq.write_table(csv.read_csv(sample).select(["product", "price", "volume"]), data)
    code = ("import sys; from pricefold import cli\n"
            f"for data, out in [({str(data)!r}, 'r.parquet'), ({str(sample)!r}, 'r.json'), ({str(data)!r}, 'again.parquet')]:\n"
            "    assert cli.main(['fit', data, '-o', out, '--quiet']) == 0\n"
            "    print(out, 'pandas' in sys.modules, 'scipy.linalg' in sys.modules)\n"
            "import numba.np.arraymath as arraymath, numba.np.linalg as linalg\n"
            "print(arraymath._HAVE_BLAS, arraymath.ensure_blas is linalg.ensure_blas, linalg.ensure_blas.__module__)")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=tmp_path)
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout.split() == ["r.parquet", "False", "False", "r.json", "False", "False",
                                   "again.parquet", "False", "False", "True", "True", "numba.np.linalg"]


def test_the_blas_check_finds_what_the_import_finds(tmp_path, monkeypatch):
    """``compiled._blas_found`` answers as numba's ``ensure_blas`` does: scipy's BLAS wrappers found here (and
    importable), not found in a ``scipy.linalg`` without them (ImportError, as the import would raise)."""
    import importlib.util

    import scipy.linalg.cython_blas  # noqa: F401  (the reference: the import numba's check makes)

    from fitcore.compiled import _blas_found
    _blas_found()
    real = importlib.util.find_spec
    empty = importlib.util.spec_from_loader("scipy.linalg", loader=None, is_package=True)
    empty.submodule_search_locations = [str(tmp_path)]
    monkeypatch.setattr(importlib.util, "find_spec", lambda name, *a: empty if name == "scipy.linalg" else real(name, *a))
    with pytest.raises(ImportError):
        _blas_found()
