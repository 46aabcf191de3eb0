"""``Ledger``, the reader that verifies as it reads: tails, interrupted appends, locks, odd files."""
from __future__ import annotations

import errno
import fcntl
import multiprocessing
import os
import signal
import socket
import threading
import time
from collections import Counter

import pytest

from fitcore import ledger
from fitcore.ledger import chain, files
from tests.fitcore.ledger_support import ANA, BO, edit_in_place, entry, lines


@pytest.fixture
def alarm():
    """Fail instead of hanging: a FIFO opened for reading waits for a writer forever."""
    def expired(signum, frame):
        raise TimeoutError("the reader hung")
    old = signal.signal(signal.SIGALRM, expired)
    signal.alarm(10)
    yield
    signal.alarm(0)
    signal.signal(signal.SIGALRM, old)


def test_a_missing_ledger_is_empty_and_intact_until_it_appears(tmp_path):
    path = tmp_path / "ledger.jsonl"
    book = ledger.Ledger(path)
    assert (book.exists, book.state, book.records, book.head_text) == (False, "intact", [], f"0:{'0' * 64}")
    ledger.append(path, [entry("a")], ANA)
    assert [r["series"]["product"] for r in book.refresh()] == ["a"] and book.exists


def test_refresh_reads_and_verifies_only_the_new_tail(tmp_path, monkeypatch):
    path = tmp_path / "ledger.jsonl"
    ledger.append(path, [entry(f"p{i}") for i in range(50)], ANA)
    book = ledger.Ledger(path)
    size = path.stat().st_size
    starts = []
    real = files.read_from
    monkeypatch.setattr(files, "read_from", lambda fd, p, start: starts.append(start) or real(fd, p, start))
    assert book.refresh() == []  # nothing new: not even opened
    assert starts == []
    ledger.append(path, [entry("late")], BO)
    starts.clear()
    [new] = book.refresh()
    assert new["series"] == {"product": "late"} and new["seq"] == 51 and book.head == (51, new["digest"])
    assert starts and min(starts) == size  # read from where the last look ended, never from the start


def write_partial_batch(path, count, of, torn=b""):
    """What a writer killed inside a batch leaves: ``count`` of its ``of`` lines, maybe a torn one."""
    scratch = path.with_name("scratch.jsonl")
    scratch.write_bytes(path.read_bytes())
    ledger.append(scratch, [entry(f"b{i}") for i in range(of)], BO)
    new = lines(scratch)[len(lines(path)):]
    tail = b"".join(new[:count]) + torn
    path.write_bytes(path.read_bytes() + tail)
    return tail


def test_an_incomplete_last_batch_is_left_out_then_set_aside_whole(tmp_path):
    path = tmp_path / "ledger.jsonl"
    ledger.append(path, [entry("a")], ANA)
    tail = write_partial_batch(path, 3, 5, torn=b'{"action":"accept","ana')
    book = ledger.Ledger(path)
    assert book.state == "intact" and [r["seq"] for r in book.records] == [1]  # none of the 3 is counted
    assert [n.line for n in book.notes] == [2, 5]
    assert "incomplete batch (3 of 5 records, lines 2–4" in book.notes[0].message
    assert "torn last line" in book.notes[1].message
    [written] = book.append([entry("c")], ANA)
    assert written["seq"] == 2 and ledger.Ledger(path).notes == []
    [side] = tmp_path.glob("ledger.jsonl.torn-*")
    assert side.read_bytes() == tail  # the whole interrupted append, in one side file
    assert not list(tmp_path.glob(".ledger.jsonl.torn-*"))  # no temporary left


def test_a_long_ledger_names_its_side_file_within_the_longest_file_name(tmp_path):
    """A trial's ledger of 244 characters: once it had a torn tail every append failed ("cannot set aside the
    interrupted tail … (File name too long)"): ``<ledger>.torn-<UTC time>`` was longer than 255 bytes."""
    path = tmp_path / ("l" * 238 + ".jsonl")  # 244 characters (the limit: 255 bytes)
    ledger.append(path, [entry("a")], ANA)
    tail = write_partial_batch(path, 2, 3)
    [written] = ledger.Ledger(path).append([entry("c")], ANA)
    assert written["seq"] == 2 and ledger.Ledger(path).notes == []
    [side] = [p for p in tmp_path.iterdir() if ".torn-" in p.name]
    assert side.read_bytes() == tail and len(side.name.encode()) <= 255
    assert side.name.startswith("l" * 200)  # findable beside it: `ls lll…*torn-*`
    assert side.name.split(".torn-")[0] == files.side_stem(path)
    shorter = tmp_path / "ledger.jsonl"
    assert files.side_stem(shorter) == "ledger.jsonl"  # a name that fits is kept whole


def test_an_incomplete_batch_followed_by_other_records_is_a_broken_chain(tmp_path):
    path = tmp_path / "ledger.jsonl"
    ledger.append(path, [entry("a")], ANA)
    write_partial_batch(path, 2, 4)
    assert ledger.Ledger(path).state == "intact"  # so far only an interrupted append
    # A writer that ignored the interrupted batch and chained on after it:
    records = ledger.parse(path.read_bytes())[0]
    record = {**records[-1], "seq": 4, "prev": records[-1]["digest"], "batch": None,
              "series": {"product": "after"}}
    record["digest"] = ledger.digest_of(record, None)
    path.write_bytes(path.read_bytes() + ledger.canonical(record) + b"\n")
    broken = ledger.Ledger(path)
    assert broken.state == "broken" and broken.problem.line == 4
    assert "an incomplete batch (2 of 4 records" in broken.problem.message
    with pytest.raises(ledger.LedgerError, match="line 4: an incomplete batch"):
        broken.append([entry("c")], ANA)


def test_records_vanishing_under_an_open_reader_break_it(tmp_path):
    path = tmp_path / "ledger.jsonl"
    ledger.append(path, [entry("a")], ANA)
    ledger.append(path, [entry("b")], ANA)
    book = ledger.Ledger(path)
    kept = lines(path)[:1]
    path.write_bytes(b"".join(kept))  # the last record dropped (valid, shorter chain) ...
    ledger.append(path, [entry("c")], BO)  # ... and the file grows again past where it was
    assert book.refresh() and book.state == "broken"
    assert "records read earlier are gone: seq 2" in book.problem.message
    assert book.replaced and book.generation == 1  # told apart from a chain edited: the screen's words


def test_non_regular_files_are_one_line_and_never_hang(tmp_path, alarm):
    fifo = tmp_path / "fifo.jsonl"
    os.mkfifo(fifo)
    folder = tmp_path / "folder.jsonl"
    folder.mkdir()
    sock = tmp_path / "s.jsonl"
    server = socket.socket(socket.AF_UNIX)
    server.bind(str(sock))
    cases = [(fifo, "a FIFO (named pipe)"), (folder, "a folder"), (sock, "a socket"),
             ("/dev/null", "a character device")]
    try:
        for path, kind in cases:
            for act in (lambda: ledger.Ledger(path), lambda: ledger.verify(path),
                        lambda: ledger.append(path, [entry("a")], ANA)):
                with pytest.raises(ledger.LedgerError) as info:
                    act()
                assert str(info.value) == f"{path}: expected a ledger file, found {kind}"
    finally:
        server.close()


def test_a_symlinked_ledger_sets_its_torn_tail_beside_the_real_file(tmp_path):
    real_folder, link_folder = tmp_path / "real", tmp_path / "links"
    real_folder.mkdir(), link_folder.mkdir()
    real = real_folder / "ledger.jsonl"
    ledger.append(real, [entry("a")], ANA)
    real.write_bytes(real.read_bytes() + b'{"act')
    link = link_folder / "team.jsonl"
    link.symlink_to(real)
    ledger.append(link, [entry("b")], ANA)
    assert [p.name.startswith("ledger.jsonl.torn-") for p in real_folder.iterdir() if p != real] == [True]
    assert list(link_folder.iterdir()) == [link] and ledger.verify(link) == []


@pytest.mark.parametrize("blank", [b"\n", b"\n\n", b"\r\n", b"  \n\t\n"])
def test_blank_lines_at_the_end_are_a_tail_not_a_broken_chain(tmp_path, blank):
    """A trial saved a ledger in an editor that added a blank line: every command refused the team's ledger as
    broken ("not a valid JSON record").  Blank lines after the last record are said and ignored like a torn line,
    and the next append moves them to a side file; a blank line between records still breaks the chain."""
    path = tmp_path / "ledger.jsonl"
    ledger.append(path, [entry("a"), entry("b")], ANA)
    path.write_bytes(path.read_bytes() + blank)
    book = ledger.Ledger(path)
    assert book.state == "intact" and len(book.records) == 2
    count = blank.count(b"\n")
    assert [str(n) for n in book.notes] == [f"line 3: {count} blank line{'s' if count > 1 else ''} at the end (an "
                                            "editor's save?) ignored; the next append moves "
                                            f"{'them' if count > 1 else 'it'} to a side file"]
    ledger.append(path, [entry("c")], BO)
    assert ledger.verify(path) == [] and len(ledger.Ledger(path).records) == 3 and not ledger.Ledger(path).notes
    assert [p.name.startswith("ledger.jsonl.torn-") for p in tmp_path.iterdir() if p != path] == [True]
    middle = path.read_bytes().replace(b"\n", b"\n\n", 1)
    path.write_bytes(middle)
    assert ledger.Ledger(path).state == "broken" and str(ledger.Ledger(path).problem) == \
        "line 2: a blank line between records"


@pytest.mark.parametrize("batch", [1, 3])
def test_a_last_record_without_its_line_end_is_ended_by_the_next_append_not_set_aside(tmp_path, batch):
    """A trial's tool wrote the ledger back without its final newline: the last record (whole, its digest good)
    read as a torn line and its batch as interrupted, and the next append moved the team's last sign-off to a side
    file — another analyst then accepted the same series anew.  Now it is said, and the next append ends its line:
    every record counts, nothing is set aside."""
    path = tmp_path / "ledger.jsonl"
    ledger.append(path, [entry("a")], ANA)
    ledger.append(path, [entry(f"b{i}") for i in range(batch)], ANA)
    whole = path.read_bytes()
    path.write_bytes(whole[:-1])
    book = ledger.Ledger(path)
    assert book.state == "intact" and len(book.records) == 1 and book.unended
    assert [str(n) for n in book.notes] == [f"line {1 + batch}: the last record has no line end (saved by a tool "
                                            "that drops the final newline?): it and its batch are not counted until "
                                            "the next append ends its line"]
    ledger.append(path, [entry("c")], BO)
    assert path.read_bytes().startswith(whole) and ledger.verify(path) == []
    assert [r["series"]["product"] for r in ledger.Ledger(path).records] == ["a", *(f"b{i}" for i in range(batch)), "c"]
    assert list(tmp_path.iterdir()) == [path]  # no side file
    path.write_bytes(whole[:-1] + b'{"schema"')  # a torn line after it still reads as torn
    assert not ledger.Ledger(path).unended


@pytest.mark.parametrize("fault", ["disk full", "folder not writable"])
def test_a_tail_that_cannot_be_set_aside_is_one_line_and_leaves_nothing(tmp_path, monkeypatch, fault):
    path = tmp_path / "ledger.jsonl"
    ledger.append(path, [entry("a")], ANA)
    path.write_bytes(path.read_bytes() + b'{"action":"')
    before = path.read_bytes()
    real_open, real_write = os.open, os.write
    if fault == "disk full":  # the side file is made, then nothing fits in it
        def write(fd, data):
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        monkeypatch.setattr(os, "write", write)
    else:  # running as root ignores folder modes: refuse new files in the folder as the kernel would
        def refuse(file, flags, mode=0o777, **kw):
            if flags & os.O_EXCL:
                raise OSError(errno.EACCES, os.strerror(errno.EACCES))
            return real_open(file, flags, mode, **kw)
        monkeypatch.setattr(os, "open", refuse)
    with pytest.raises(ledger.LedgerError) as info:
        ledger.append(path, [entry("b")], ANA)
    monkeypatch.setattr(os, "write", real_write)
    monkeypatch.setattr(os, "open", real_open)
    reason = "the disk is full" if fault == "disk full" else "Permission denied"
    assert str(info.value) == (f"{path}: cannot set aside the interrupted tail (11 bytes) beside it ({reason}); "
                               "nothing was recorded")
    assert path.read_bytes() == before and sorted(p.name for p in tmp_path.iterdir()) == ["ledger.jsonl"]


def test_readers_judge_the_tail_under_a_shared_lock(tmp_path):
    path = tmp_path / "ledger.jsonl"
    ledger.append(path, [entry("a")], ANA)
    scratch = tmp_path / "scratch.jsonl"
    scratch.write_bytes(path.read_bytes())
    ledger.append(scratch, [entry("b")], ANA)
    line = lines(scratch)[1]
    writer = os.open(path, os.O_WRONLY | os.O_APPEND)
    fcntl.flock(writer, fcntl.LOCK_EX)  # a live append, half-way through its line
    os.write(writer, line[:30])
    poll = ledger.Ledger(path, wait=False)  # a screen's poll: does not block, does not cry "torn"
    assert poll.notes == [] and len(poll.records) == 1
    seen = {}
    reader = threading.Thread(target=lambda: seen.update(book=ledger.Ledger(path)))
    reader.start()
    time.sleep(0.3)
    assert reader.is_alive()  # verify waits for the writer ...
    os.write(writer, line[30:])
    os.close(writer)  # ... which finishes its line and lets go
    reader.join(10)
    assert seen["book"].notes == [] and len(seen["book"].records) == 2
    assert [r["seq"] for r in poll.refresh()] == [2]


def _bulk_writer(path, name):
    book = ledger.Ledger(path)
    for i in range(30):
        book.append([entry(f"{name}-{i}-{j}") for j in range(25)], ledger.Identity(name, name, "h"))


def _poller(path, rounds, out):
    book = ledger.Ledger(path)
    for _ in range(rounds):
        book.refresh(wait=False)
        sizes = Counter(r["batch"]["id"] for r in book.records)
        if book.state != "intact" or any(n != 25 for n in sizes.values()):
            out.put("partial")
            return
    out.put(len(book.records))


def test_a_polling_reader_never_counts_part_of_a_batch(tmp_path):
    path = tmp_path / "ledger.jsonl"
    ledger.append(path, [entry(f"seed-{j}") for j in range(25)], ANA)
    context = multiprocessing.get_context("fork")
    out = context.Queue()
    workers = [context.Process(target=_bulk_writer, args=(path, f"w{k}")) for k in range(2)]
    poller = context.Process(target=_poller, args=(path, 400, out))
    for w in [*workers, poller]:
        w.start()
    for w in [*workers, poller]:
        w.join(60)
    assert all(w.exitcode == 0 for w in [*workers, poller])
    seen = out.get(timeout=5)
    assert seen != "partial" and seen % 25 == 0
    assert len(ledger.Ledger(path).records) == 25 * 61


def test_a_problem_seen_without_the_lock_is_judged_under_it(tmp_path):
    path = tmp_path / "ledger.jsonl"
    ledger.append(path, [entry("a")], ANA)
    book = ledger.Ledger(path)
    writer = os.open(path, os.O_WRONLY | os.O_APPEND)
    fcntl.flock(writer, fcntl.LOCK_EX)  # a writer at work (setting a tail aside can change bytes under a reader)
    os.write(writer, b"not a record\n")
    assert book.refresh(wait=False) == [] and book.state == "intact"  # not believed without the lock
    os.close(writer)
    assert book.refresh() == [] and book.state == "broken" and book.problem.line == 2


def six_records(path):
    for name in "abcdef":
        ledger.append(path, [entry(name)], ANA)


@pytest.mark.parametrize("keep_mtime", [False, True])
def test_an_earlier_record_edited_in_place_is_seen_before_an_append(tmp_path, keep_mtime):
    # A trial: a screen open on the ledger, "ana" → "ann" on line 4 in another terminal (same length),
    # then a hold: it was appended after the edited record. Every append looks again at what was verified,
    # even when the edit put the modification time back.
    path = tmp_path / "ledger.jsonl"
    six_records(path)
    book = ledger.Ledger(path)
    edit_in_place(path, 4, b'"analyst":"ana"', b'"analyst":"ann"', keep_mtime)
    edited = path.read_bytes()
    with pytest.raises(ledger.LedgerError, match=r"line 4: record was edited: its digest does not match its "
                                                 r"content; nothing was recorded \(the chain is broken\)$"):
        book.append([entry("g")], ANA)
    assert path.read_bytes() == edited  # nothing appended
    assert book.state == "broken" and book.problem.line == 4
    assert [p.line for p in ledger.verify(path)] == [4]  # what verify says of the file, said by the open reader
    with pytest.raises(ledger.LedgerError, match="line 4: record was edited"):
        book.append([entry("g")], BO)  # and it stays refused
    assert path.read_bytes() == edited


def test_a_refresh_that_finds_the_file_changed_sees_an_earlier_record_edited(tmp_path):
    path = tmp_path / "ledger.jsonl"
    six_records(path)
    book = ledger.Ledger(path)
    edit_in_place(path, 2, b'"product":"b"', b'"product":"x"')
    later = path.stat().st_mtime_ns + 10**9  # the edit's time, past any clock tick shared with the last look
    os.utime(path, ns=(later, later))
    book.refresh(wait=False)  # the screen's 2 s poll
    assert book.state == "broken" and book.problem.line == 2 and book.problem.message == chain.EDITED
    assert book.generation == 1  # read again from the start, as a file rewritten at another length is


def test_the_last_record_edited_in_place_is_seen_too(tmp_path):
    path = tmp_path / "ledger.jsonl"
    six_records(path)
    book = ledger.Ledger(path)
    edit_in_place(path, 6, b'"product":"f"', b'"product":"x"', keep_mtime=True)
    edited = path.read_bytes()
    with pytest.raises(ledger.LedgerError, match="line 6: record was edited"):
        book.append([entry("g")], ANA)
    assert path.read_bytes() == edited and book.state == "broken" and book.problem.line == 6


def test_a_file_replaced_by_rename_with_an_edit_of_the_same_length_is_seen(tmp_path):
    # What `sed -i` does: a new file (another inode) with one byte changed.
    path = tmp_path / "ledger.jsonl"
    six_records(path)
    book = ledger.Ledger(path)
    copy = tmp_path / "copy.jsonl"
    copy.write_bytes(path.read_bytes().replace(b'"product":"c"', b'"product":"x"'))
    os.replace(copy, path)
    with pytest.raises(ledger.LedgerError, match="line 3: record was edited"):
        book.append([entry("g")], ANA)
    assert book.state == "broken" and book.problem.line == 3


def test_other_readers_appends_are_not_taken_for_edits(tmp_path):
    # Two analysts' long-lived readers appending in turn, one over a torn tail another writer left (set
    # aside by the next append: bytes after the verified records change, the records do not).
    path = tmp_path / "ledger.jsonl"
    six_records(path)
    path.write_bytes(path.read_bytes() + b'{"action":"acc')
    ana, bo = ledger.Ledger(path), ledger.Ledger(path)
    assert [n.message[:15] for n in ana.notes] == ["torn last line "]
    bo.append([entry("g")], BO)
    assert [r["seq"] for r in ana.refresh()] == [7] and ana.state == "intact" and ana.generation == 0
    ana.append([entry("h")], ANA)
    for i in range(3):
        bo.append([entry(f"b{i}"), entry(f"c{i}")], BO)  # batches too
        ana.append([entry(f"a{i}")], ANA)
    assert [r["seq"] for r in bo.refresh()] == [17]  # ana's last; bo read the others under its lock
    assert (ana.state, bo.state, ana.head, ana.generation, bo.generation) == ("intact", "intact", bo.head, 0, 0)
    assert ledger.verify(path) == [] and len(ledger.Ledger(path).records) == 17


def test_a_change_in_place_the_chain_still_verifies_is_read_again_and_judged_as_verify_does(tmp_path):
    # Two members of line 3 swapped (the record's content the same, its length too): the records read are
    # read again from the start (the screen replays them) and the ledger stays intact, as verify finds it.
    path = tmp_path / "ledger.jsonl"
    six_records(path)
    book = ledger.Ledger(path)
    edit_in_place(path, 3, b'"host":"server-1","model":"poly1"', b'"model":"poly1","host":"server-1"')
    assert ledger.verify(path) == []
    [written] = book.append([entry("g")], ANA)
    assert (written["seq"], book.state, book.generation, len(book.records)) == (7, "intact", 1, 7)
    assert ledger.verify(path) == []


@pytest.fixture
def later(monkeypatch):
    """The reader's clock five seconds ahead: every change time it meets is settled (``reader.settle_ns``).
    Returns the list of the ends of the verified bytes it read again (``files.crc_of`` calls)."""
    from fitcore.ledger import reader
    real, reads = time.time_ns, []
    monkeypatch.setattr(reader.time, "time_ns", lambda: real() + 5 * 10**9)
    crc_of = files.crc_of
    monkeypatch.setattr(files, "crc_of", lambda fd, path, end: reads.append(end) or crc_of(fd, path, end))
    return reads


def test_verified_bytes_whose_change_time_has_settled_are_not_read_again_before_an_append(tmp_path, later):
    # 26-69 ms a decision at 100,000 records: read again only when a write in the same clock tick as the
    # last look cannot be ruled out.
    path = tmp_path / "ledger.jsonl"
    six_records(path)
    book = ledger.Ledger(path)  # read whole: as good as a look
    book.append([entry("g")], ANA)
    assert later == []
    book.append([entry("h")], ANA)  # its own append just now: a write in the same tick cannot be ruled out
    assert len(later) == 1
    book.append([entry("i")], ANA)
    assert len(later) == 2
    book.refresh(wait=False)  # the screen's poll, the file still since: read again there, not at the decision
    assert len(later) == 3
    book.refresh(wait=False)
    book.append([entry("j")], ANA)
    assert len(later) == 3 and book.state == "intact" and ledger.verify(path) == []


@pytest.mark.parametrize("keep_mtime", [False, True])
def test_an_edit_after_a_settled_look_is_still_seen_before_an_append_and_by_the_poll(tmp_path, later, keep_mtime):
    path = tmp_path / "ledger.jsonl"
    six_records(path)
    book, poller = ledger.Ledger(path), ledger.Ledger(path)
    edit_in_place(path, 4, b'"analyst":"ana"', b'"analyst":"ann"', keep_mtime)  # the change time moves
    edited = path.read_bytes()
    with pytest.raises(ledger.LedgerError, match="line 4: record was edited"):
        book.append([entry("g")], ANA)
    assert path.read_bytes() == edited and later
    poller.refresh(wait=False)  # even with the modification time put back
    assert poller.state == "broken" and poller.problem.line == 4
