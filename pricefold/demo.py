"""``pricefold demo``: the bundled invented sample, fitted, on the triage screen.

With the demo's default settings the screen opens at once on the sample's results as the engine made
them (``sample/results.parquet``, shipped; ``python -m pricefold.demo --write-shipped`` makes it again,
and a test checks it equals a fresh fit).  The same engine then refits the sample behind the screen to
bring the observations and bands; on the first run after an install it compiles first, in a separate
process so the screen stays responsive, with a note saying so.  Other settings (``--control``,
``--season``) fit first, then open the screen.

The demo writes only into its own folder (``--dir``): the sample folder may be read-only.
"""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

SHIPPED = "results.parquet"  # in the sample folder, beside wholesale.csv and plan.csv
COMPILING_NOTE = ("The engine is compiling behind the screen (once after an install, about 10–20 s): the "
                  "observations and bands appear when it is done; everything else works now.")


def run_demo(args, open_triage) -> int:
    """The demo; ``open_triage``: the command line's (``pricefold.triage_cli.open_triage``), passed in so this
    module does not import the one that imports it."""
    from fitcore.errors import DataError
    from fitcore.outputs import check_outputs
    from tui.factory import SAMPLE, sample_source

    folder = args.dir
    if folder.exists() and not folder.is_dir():
        raise DataError("exists and is not a folder; --dir names the folder for the demo's files", path=str(folder))
    sample = sample_source(tuple(args.control), args.season)
    shipped = SAMPLE / SHIPPED
    ready = not args.control and not args.season and shipped.is_file()
    results_path = folder / ("results.parquet" if ready else "results.json")
    inputs = [("the sample data", sample.data), ("the sample plan", sample.plan_file), ("the shipped results", shipped)]
    if folder.is_dir():
        check_outputs([(results_path, "results")], inputs)
        from .ledger_cli import refuse_not_a_ledger
        refuse_not_a_ledger(folder / "ledger.jsonl")  # before the results are written: "nothing was done" is true
    from .terminal import require_terminal
    require_terminal("the demo, which ends in the triage screen,")  # the folder's faults said first, then this
    made = [f for f in (folder, *folder.parents) if not f.exists()]  # the folders this run makes, deepest first
    try:
        folder.mkdir(parents=True, exist_ok=True)  # the demo's own folder, as documented
    except OSError as exc:
        raise DataError(f"cannot make the folder ({exc.strerror})", path=str(folder)) from None
    written: list[str] = []  # what ``_demo`` has put in place
    try:
        return _demo(args, open_triage, sample, shipped, ready, results_path, folder, written)
    except KeyboardInterrupt as exc:  # "nothing was written" would be untrue once the results are in place
        remove_empty(made)
        if written and not getattr(exc, "written", None):
            import signal

            from fitcore.outputs.atomic import InterruptedAfterWriting
            raise InterruptedAfterWriting(written, getattr(exc, "signum", signal.SIGINT)) from None
        raise
    except BaseException:  # failed: the folders it made go too, where nothing was written
        remove_empty(made)
        raise


def remove_empty(folders: list[Path]) -> None:
    """Remove ``folders`` (deepest first: the ones a run made) while each is empty; never one holding a file."""
    for folder in folders:
        try:
            folder.rmdir()  # refused when anything is in it
        except OSError:
            return


def _demo(args, open_triage, sample, shipped: Path, ready: bool, results_path: Path, folder: Path,
          written: list[str]) -> int:
    from fitcore.data.config import load_config

    from .options import settings_file_keys
    sample.units = load_config(None, settings_file_keys()).get("units", {})
    if ready:
        sample.expected_sha256 = place_shipped(shipped, results_path, sample)
        written.append(str(results_path))
        print(f"the invented sample's results → {results_path} (refitted behind the screen once it opens)", file=sys.stderr)
        _report_hint(results_path, folder, args.analyst)
        from fitcore.compiled import looks_compiled
        if not looks_compiled():
            sample.warnings.append(COMPILING_NOTE)
        return open_triage(sample, folder / "ledger.jsonl", args.analyst, stored=results_path,
                           prepare=compile_elsewhere)
    from fitcore.results.write import write_results
    from fitcore.results.source import fit_source, source_from_results
    print("fitting the invented sample …\n(the first run after an install also compiles the engine: ~10–20 s, once)",
          file=sys.stderr)
    results, diagnosis = fit_source(sample)
    write_results(results, results_path, diagnosis)
    written.append(str(results_path))
    print(f"fitted the invented sample: {results.n_series} series → {results_path}", file=sys.stderr)
    _report_hint(results_path, folder, args.analyst)
    source = source_from_results(results_path)
    source.units = sample.units
    return open_triage(source, folder / "ledger.jsonl", args.analyst)


def _report_hint(results_path: Path, folder: Path, analyst: str | None = None) -> None:
    """How to come back to the demo's decisions (its ledger is not the one triage would take by default), as the
    analyst ``--analyst`` named (left out, triage records under the OS user), and make their report (whose charts
    need matplotlib, an extra); quoted for the shell."""
    import importlib.util
    from shlex import quote

    from .report.command import INSTALL_HINT  # the report's own words for the extra
    results, ledger, pricefold = quote(str(results_path)), quote(str(folder / "ledger.jsonl")), typed_command()
    who = f" --analyst {quote(analyst)}" if analyst else ""
    print(f"back to it: {pricefold} triage {results} --ledger {ledger}{who}", file=sys.stderr)
    charts = "" if importlib.util.find_spec("matplotlib") else f"; {INSTALL_HINT}"
    print(f"report, once a decision is in the ledger: {pricefold} report {results} --ledger {ledger} "
          f"-o {quote(str(folder / 'report.html'))}{charts}", file=sys.stderr)


def typed_command() -> str:
    """How to run this pricefold again from the shell it ran in: ``pricefold`` where that finds this
    installation (an activated environment), else the command's path (``.venv/bin/pricefold``, relative to
    the current folder when inside it), else ``python -m pricefold`` with this interpreter."""
    import os
    import shlex
    import shutil
    here = Path(sys.executable).parent / "pricefold"  # not resolved: a virtual environment's python is a link
    if not here.is_file():
        return f"{shlex.quote(sys.executable)} -m pricefold"
    found = shutil.which("pricefold")
    if found and os.path.samefile(found, here):
        return "pricefold"
    near = os.path.relpath(here)
    return shlex.quote(here.as_posix() if near.startswith("..") else near)


def place_shipped(shipped: Path, target: Path, sample) -> str:
    """Write the shipped results to ``target`` naming this checkout's sample files (the shipped file names
    them relative to its folder); the sample data's SHA-256 as the results recorded it."""
    import pyarrow.parquet as pq

    from fitcore.outputs import atomic_write
    from fitcore.results.write import write_parquet
    read = pq.ParquetFile(shipped, page_checksum_verification=True).read()  # not read_table: that imports pandas
    table, header = naming(read, str(sample.data), str(sample.plan_file))
    atomic_write(target, lambda handle: write_parquet(table, handle))
    return header["input"]["sha256"]


def write_shipped(target: Path) -> None:
    """Fit the sample under the demo's default settings and write the results the demo ships, naming the
    sample's files relative to the sample folder (so the file is the same from any checkout)."""
    from fitcore.outputs import atomic_write
    from fitcore.results.write import write_parquet
    from tui.factory import fit_source, sample_source
    sample = sample_source()
    table = shipped_table(*fit_source(sample), sample)
    atomic_write(target, lambda handle: write_parquet(table, handle))


def shipped_table(results, diagnosis, sample):
    """The Parquet table of a fit of the sample, its file names relative to the sample folder."""
    from fitcore.results.write import results_table
    return naming(results_table(results, diagnosis), sample.data.name, sample.plan_file.name)[0]


def naming(table, data: str, plan: str):
    """``(table, header)``: the results ``table`` with its header naming ``data`` and ``plan`` as the files
    it was fitted from (the one place the demo rewrites a header)."""
    header = json.loads(table.schema.metadata[b"pricefold"])
    header["input"]["path"] = data
    header["settings"]["plan"]["file"] = plan
    from fitcore.results.checks import header_metadata
    return table.replace_schema_metadata(header_metadata(header)), header


def compile_elsewhere() -> None:
    """Compile the engine's loops into numba's cache in a separate process (which fits the sample), so
    the screen's own process only loads them; nothing to do when the cache already holds them."""
    from fitcore.compiled import looks_compiled
    if looks_compiled():
        return
    subprocess.run([sys.executable, "-m", "pricefold.demo", "--compile"], stdin=subprocess.DEVNULL,
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=False)


def main(argv: list[str]) -> int:
    if argv[:1] == ["--compile"]:  # compile_elsewhere's process: a fit of the sample fills the cache
        from tui.factory import fit_source, sample_source
        fit_source(sample_source())
        return 0
    if argv[:1] == ["--write-shipped"]:
        from tui.factory import SAMPLE
        write_shipped(SAMPLE / SHIPPED)
        print(f"wrote {SAMPLE / SHIPPED}")
        return 0
    print("usage: python -m pricefold.demo --write-shipped   (rewrite sample/results.parquet from a fresh fit)",
          file=sys.stderr)
    return 2


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
