"""The one atomic writer and the output guard (``fitcore.outputs``)."""
from __future__ import annotations

import os
import re
import stat
import subprocess
import sys

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from fitcore.errors import DataError
from fitcore.outputs import Batch, atomic_write, check_not_input, check_outputs, is_own, remove_leftovers
from fitcore.outputs.atomic import HOST
from fitcore.outputs.atomic import temp_path


def mode(path) -> int:
    return stat.S_IMODE(os.stat(path).st_mode)


@pytest.fixture
def umask_027():
    old = os.umask(0o027)
    yield
    os.umask(old)


def test_a_new_file_gets_the_umasks_mode_and_a_replaced_file_keeps_its_own(tmp_path, umask_027):
    fresh = tmp_path / "new.json"
    atomic_write(fresh, lambda h: h.write(b"{}"))
    assert mode(fresh) == 0o640  # 0666 less the umask, as open() would give it (mkstemp alone gives 0600)
    kept = tmp_path / "kept.json"
    kept.write_text("old")
    kept.chmod(0o604)
    atomic_write(kept, lambda h: h.write(b"new"))
    assert kept.read_text() == "new" and mode(kept) == 0o604


def test_the_digest_is_of_what_was_written(tmp_path):
    import hashlib
    digest = atomic_write(tmp_path / "x.csv", lambda h: h.write(b"a,b\n"))
    assert digest == hashlib.sha256(b"a,b\n").hexdigest()


def test_temporary_names_carry_the_pid_and_dead_writers_leftovers_are_removed(tmp_path):
    target = tmp_path / "r.json"
    ours = temp_path(target)
    assert re.fullmatch(rf"\.r\.json\.pricefold-.+-{os.getpid()}-[0-9a-f]{{8}}\.tmp", ours.name)
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True,
                          text=True).stdout.strip()
    leftover = tmp_path / f".r.json.pricefold-{HOST}-{dead}-0badf00d.tmp"  # a killed write
    leftover.write_bytes(b"x" * 1000)
    folder = tmp_path / f".r.json.pricefold-{HOST}-{dead}-deadbeef.tmp"  # a killed Dask run's staging folder
    folder.mkdir()
    (folder / "part-00000.parquet").write_bytes(b"x")
    live = ours  # this process is alive: never removed
    live.write_bytes(b"mine")
    other = tmp_path / ".notes.json.pricefold-elsewhere-1-00000000.tmp"  # another file's: not this target's
    other.write_bytes(b"x")
    atomic_write(target, lambda h: h.write(b"{}"))
    assert not leftover.exists() and not folder.exists()
    assert live.exists() and other.exists() and target.read_bytes() == b"{}"


def test_a_failed_write_leaves_the_earlier_file_and_no_temporary(tmp_path):
    target = tmp_path / "r.json"
    target.write_text("earlier")

    def fails(handle):
        handle.write(b"half")
        raise OSError(28, "No space left on device")

    with pytest.raises(DataError, match="cannot write .No space left on device"):
        atomic_write(target, fails)
    assert target.read_text() == "earlier" and sorted(p.name for p in tmp_path.iterdir()) == ["r.json"]


def test_a_file_written_by_name_lands_whole_keeps_its_mode_and_fails_cleanly(tmp_path):
    # pyarrow writes the temporary file itself (by_name); read back with pyarrow, the reference reader.
    table = pa.table({"x": [1.5, 2.5]})
    target = tmp_path / "r.parquet"
    target.write_bytes(b"earlier")
    target.chmod(0o604)
    assert atomic_write(target, lambda name: pq.write_table(table, name), by_name=True) is None  # no digest
    assert pq.read_table(target).equals(table) and mode(target) == 0o604
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.parquet"]

    def fails(name):
        pq.write_table(table, name)
        raise OSError(28, "No space left on device")

    before = target.read_bytes()
    with pytest.raises(DataError, match="No space left on device"):
        atomic_write(target, fails, by_name=True)
    assert target.read_bytes() == before and sorted(p.name for p in tmp_path.iterdir()) == ["r.parquet"]


def test_a_temporary_file_replaced_under_its_name_is_never_put_in_place(tmp_path):
    target = tmp_path / "r.parquet"
    target.write_bytes(b"earlier")

    def swaps(name):  # what this process created is no longer the file at that name
        os.unlink(name)
        with open(name, "wb") as other:
            other.write(b"someone else's")

    with pytest.raises(DataError, match="replaced while written"):
        atomic_write(target, swaps, by_name=True)
    assert target.read_bytes() == b"earlier" and sorted(p.name for p in tmp_path.iterdir()) == ["r.parquet"]


def test_a_symlink_is_written_through_and_stays_a_link(tmp_path):
    folder = tmp_path / "runs"
    folder.mkdir()
    real = folder / "results.json"
    real.write_bytes(b"old")
    link = tmp_path / "latest.json"
    link.symlink_to(real)
    atomic_write(link, lambda h: h.write(b"new"))
    assert link.is_symlink() and real.read_bytes() == b"new"
    assert sorted(p.name for p in folder.iterdir()) == ["results.json"]  # no temporary left beside it


def test_a_clean_run_removes_a_killed_writers_temporary_rejects_file_too(tmp_path):
    target = tmp_path / "r.rejects.csv"
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True)
    leftover = tmp_path / f".r.rejects.csv.pricefold-{HOST}-{int(dead.stdout)}-0a1b2c3d.tmp"
    leftover.write_text("product,price,line,reason\n")
    assert remove_leftovers(target) == [leftover] and not leftover.exists()


def test_a_batch_lands_in_order_or_not_at_all(tmp_path):
    first, second = tmp_path / "r.rejects.csv", tmp_path / "r.json"
    first.write_text("old rejects")
    second.write_text("old results")
    with pytest.raises(RuntimeError):
        with Batch() as batch:
            batch.add(first, lambda h: h.write(b"new rejects"))
            raise RuntimeError("the fit failed after the rejects were staged")
    assert first.read_text() == "old rejects" and second.read_text() == "old results"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.json", "r.rejects.csv"]
    with Batch() as batch:
        batch.add(first, lambda h: h.write(b"new rejects"))
        batch.add(second, lambda h: h.write(b"new results"))
        assert first.read_text() == "old rejects"  # nothing visible until the block ends
    assert first.read_text() == "new rejects" and second.read_text() == "new results"
    assert os.stat(first).st_mtime_ns <= os.stat(second).st_mtime_ns


def results_json(path):
    path.write_text('{"schema":"pricefold-results/1","settings":{}}')
    sealed(path)  # as fit leaves it
    return path


@pytest.mark.parametrize("make, message", [
    (lambda d: (d / "in.parquet", d / "in.parquet"), "this is also an input"),
    (lambda d: (d / "link.parquet", d / "in.parquet"), "this is also an input"),        # a symlink to the input
    (lambda d: (d / "hard.parquet", d / "in.parquet"), "this is also an input"),        # a second name of it
    (lambda d: (d / "sub" / ".." / "in.parquet", d / "in.parquet"), "this is also an input"),
    (lambda d: (d / "parts" / "r.parquet", d / "parts"), "inside the input folder"),
])
def test_an_output_that_is_an_input_is_refused(tmp_path, make, message):
    (tmp_path / "in.parquet").write_bytes(b"PAR1")
    (tmp_path / "link.parquet").symlink_to("in.parquet")
    os.link(tmp_path / "in.parquet", tmp_path / "hard.parquet")
    (tmp_path / "sub").mkdir()
    (tmp_path / "parts").mkdir()
    output, source = make(tmp_path)
    with pytest.raises(DataError, match=message):
        check_outputs([(output, "results")], [("the data", source)])


def test_a_results_folder_may_not_hold_an_input(tmp_path):
    (tmp_path / "out" / "data").mkdir(parents=True)
    with pytest.raises(DataError, match="inside the output folder"):
        check_not_input(tmp_path / "out", [("the data", tmp_path / "out" / "data")], folder=True)


def test_only_pricefolds_own_earlier_outputs_are_replaced(tmp_path):
    results = results_json(tmp_path / "r.json")
    table = pa.table({"a": [1]}).replace_schema_metadata({b"pricefold": b"{}"})
    pq.write_table(table, tmp_path / "r.parquet")
    pq.write_table(pa.table({"a": [1]}), tmp_path / "data.parquet")
    (tmp_path / "r.rejects.csv").write_text("product,price,line,reason\n")
    (tmp_path / "x.csv").write_text("product,status,model,coef\n")
    sealed(tmp_path / "x.csv")  # as ledger export leaves it
    (tmp_path / "notes.json").write_text('{"mine": 1}')
    (tmp_path / "empty.json").write_bytes(b"")
    assert is_own(results, "results") and is_own(tmp_path / "r.parquet", "results")
    assert is_own(tmp_path / "r.rejects.csv", "rejects") and is_own(tmp_path / "x.csv", "export")
    assert is_own(tmp_path / "empty.json", "results")
    assert not is_own(tmp_path / "data.parquet", "results") and not is_own(tmp_path / "notes.json", "results")
    assert not is_own(tmp_path / "x.csv", "rejects") and not is_own(tmp_path / "r.rejects.csv", "export")
    for name in ("notes.json", "data.parquet"):
        with pytest.raises(DataError, match="not a pricefold results file"):
            check_outputs([(tmp_path / name, "results")], [])
    check_outputs([(results, "results"), (tmp_path / "empty.json", "results")], [])


@pytest.mark.parametrize("where, message", [("no/such/r.json", "no such folder"), ("f.txt/r.json", "is not a folder")])
def test_an_output_folder_must_exist(tmp_path, where, message):
    (tmp_path / "f.txt").write_text("x")
    with pytest.raises(DataError, match=message):
        check_outputs([(tmp_path / where, "results")], [])
    assert not (tmp_path / "no").exists()


def test_leftovers_of_another_target_are_left_alone(tmp_path):
    stray = tmp_path / ".r.json.pricefold-otherhost-1-00000000.tmp"
    stray.write_text("x")
    assert remove_leftovers(tmp_path / "r.json") == [] and stray.exists()


@pytest.mark.parametrize("flags, said", [(os.ST_RDONLY, "on a read-only file system"), (0, "permission denied")])
def test_a_folder_that_takes_no_files_says_why(tmp_path, monkeypatch, flags, said):
    """A read-only file system is not a permission problem (statvfs(3) says which; faked here: a test cannot
    mount one)."""
    from fitcore.outputs import guard
    real = os.statvfs(tmp_path)
    monkeypatch.setattr(guard.os, "access", lambda *a, **k: False)
    monkeypatch.setattr(guard.os, "statvfs", lambda p: os.statvfs_result((*real[:8], flags, real[9])))
    with pytest.raises(DataError, match=re.escape(f"cannot write in the folder {tmp_path} ({said})")):
        check_outputs([(tmp_path / "r.json", "results")], [])


# A signal between a batch's renames would leave new rejects beside old results (or the reverse): the
# renames finish first, then the signal is acted on as it would have been.
_SIGNAL_MID_BATCH = """
import os, signal, sys
from pathlib import Path
import fitcore.outputs.atomic as atomic
import fitcore.outputs.batch as batch_module
first, second, name = Path(sys.argv[1]), Path(sys.argv[2]), sys.argv[3]
replace = os.replace
def replace_then_signal(src, dst):
    replace(src, dst)
    if Path(dst) == first:
        os.kill(os.getpid(), getattr(signal, name))
atomic.os.replace = replace_then_signal
try:
    with batch_module.Batch() as batch:
        batch.add(first, lambda h: h.write(b"new rejects"))
        batch.add(second, lambda h: h.write(b"new results"))
except KeyboardInterrupt as exc:
    print("written:", ", ".join(Path(p).name for p in exc.written))
    sys.exit(130)
print("not stopped")
"""


@pytest.mark.parametrize("name, returncode", [("SIGINT", 130), ("SIGTERM", -15), ("SIGHUP", -1)])
def test_a_signal_between_renames_lands_after_the_last(tmp_path, name, returncode):
    first, second = tmp_path / "r.rejects.csv", tmp_path / "r.json"
    first.write_text("old rejects")
    second.write_text("old results")
    # each signal's own handler put back in the child: a pytest run in the background may inherit SIGINT ignored,
    # one under nohup SIGHUP (the batch keeps an ignored signal ignored)
    code = ("import signal; signal.signal(signal.SIGINT, signal.default_int_handler)\n"
            "signal.signal(signal.SIGTERM, signal.SIG_DFL); signal.signal(signal.SIGHUP, signal.SIG_DFL)\n"
            + _SIGNAL_MID_BATCH)
    done = subprocess.run([sys.executable, "-c", code, str(first), str(second), name], capture_output=True,
                          text=True, timeout=60)
    assert done.returncode == returncode, done.stderr
    if name == "SIGINT":  # raised once both were in place, saying so
        assert done.stdout == "written: r.rejects.csv, r.json\n"
    assert first.read_text() == "new rejects" and second.read_text() == "new results"
    assert [p.name for p in tmp_path.iterdir() if p.name.endswith(".tmp")] == []


def sealed(path):
    """Seal ``path`` as ``ledger export`` seals what it writes."""
    import hashlib

    from fitcore.outputs.seal import seal_file
    seal_file(path, hashlib.sha256(path.read_bytes()).hexdigest())


def test_an_edited_export_or_report_is_not_replaced(tmp_path, monkeypatch):
    """A trial found: a line added by hand to an export, a note typed into a cell (``sed -i``), a number changed,
    a file of one's own under the export's header, and an edited report page were written over, judged by their
    header or generator tag (or, for an export, the shape of its rows) alone."""
    import fitcore.outputs.seal as seal_module
    from fitcore.outputs.seal import blank_tag, file_sealed, intact, seal
    export = tmp_path / "e.csv"
    head = "product,status,model,coef,ledger_head\r\n"
    export.write_text(head + 'a,accepted,poly1,"[1, 2]",3:ab\r\nb,pending,,[],3:ab\r\n', newline="")
    assert not is_own(export, "export")  # a file of that shape nobody sealed
    sealed(export)
    assert file_sealed(export) and is_own(export, "export")
    text = export.read_text()
    export.write_text(text.replace("pending,,", "pending,poly2,"))  # a cell changed in place: the seal no longer holds
    assert not is_own(export, "export")
    with pytest.raises(DataError, match=r"unchanged since written \(changed since it was written\)"):
        check_outputs([(export, "export")], [])
    export.unlink()
    export.write_text(text)  # a new file of the same bytes (an editor's copy): no seal
    assert file_sealed(export) is False and not is_own(export, "export")
    with pytest.raises(DataError, match=r"\(no seal: edited by a program that saved a new file, copied"):
        check_outputs([(export, "export")], [])
    # where the system keeps no seals, an export is judged by the shape of its rows
    monkeypatch.setattr(seal_module, "file_sealed", lambda path: None)
    assert is_own(export, "export")
    with open(export, "a", newline="") as handle:
        handle.write("MY HAND ADJUSTMENTS: raise apples by 5%\r\n")
    assert not is_own(export, "export")
    export.write_text(head + "x,approved,poly1,[1],3:ab\r\n", newline="")  # a status the command never writes
    assert not is_own(export, "export")
    export.write_text(head + "a,accepted,poly1,[1],3:ab\r\nb,accepted,poly1,[1],4:cd\r\n", newline="")  # two heads
    assert not is_own(export, "export")
    monkeypatch.undo()
    page = tmp_path / "r.html"
    text = seal(f'<html><head><meta name="generator" content="pricefold report 1">\n{blank_tag()}\n</head>x</html>')
    page.write_text(text)
    assert intact(page.read_bytes()) and is_own(page, "report")
    page.write_text(text.replace(">x<", ">y<"))
    assert intact(page.read_bytes()) is False and not is_own(page, "report")
    with pytest.raises(DataError, match="unchanged since"):
        check_outputs([(page, "report")], [])
    import re
    for unsealed in (re.sub(r'<meta name="pricefold-seal"[^>]*>', "", text),  # its seal removed, or reformatted
                     re.sub(r'(<meta name="pricefold-seal"[^>]*)>', r"\1 />", text)):
        page.write_text(unsealed)
        assert intact(page.read_bytes()) is None and not is_own(page, "report")


# A process that wrote a batch's journal and put its first file in place, then died (as under kill -9).
_DIED_MID_BATCH = """
import os, sys
from pathlib import Path
from fitcore.outputs.atomic import stage
from fitcore.outputs.journal import write_journal
first, second = Path(sys.argv[1]), Path(sys.argv[2])
staged = [stage(first, lambda h: h.write(b"new rejects")), stage(second, lambda h: h.write(b"new results"))]
write_journal([(s.temp, s.path) for s in staged], [])
staged[0].put()
os._exit(0)
"""


def test_a_dead_writers_half_done_batch_is_kept_then_finished(tmp_path):
    from fitcore.outputs import finish_batches, unfinished
    first, second = tmp_path / "r.rejects.csv", tmp_path / "r.json"
    first.write_text("old rejects")
    second.write_text("old results")
    subprocess.run([sys.executable, "-c", _DIED_MID_BATCH, str(first), str(second)], check=True, timeout=60)
    assert first.read_text() == "new rejects" and second.read_text() == "old results"
    assert remove_leftovers(second) == []  # its temporary copy is what the journal finishes from
    assert len(unfinished(second)) == 1 and len(unfinished(first)) == 1
    said = finish_batches(second)
    assert len(said) == 1 and said[0].endswith("had written in full: r.rejects.csv, r.json")
    assert first.read_text() == "new rejects" and second.read_text() == "new results"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.json", "r.rejects.csv"]
    assert finish_batches(second) == [] and unfinished(second) == []


def test_a_journal_cut_short_is_dropped_as_a_batch_never_begun(tmp_path):
    from fitcore.outputs import finish_batches
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True)
    torn = tmp_path / f".r.json.pricefold-{HOST}-{int(dead.stdout)}-0a1b2c3d.journal"
    torn.write_text('{"format": "pricefold-batch/1", "renames": [{"temp"')
    assert finish_batches(tmp_path / "r.json") == [] and not torn.exists()
