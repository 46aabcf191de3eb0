"""Writing around the page cache (``fitcore.outputs.direct``): every byte lands in order, every write made
around the cache is aligned, a refusal or a short write sends the rest through the cache, and the results'
Parquet file is the same bytes either way."""
from __future__ import annotations

import errno
import os
import random

import pytest

from fitcore.outputs import atomic_write
from fitcore.outputs import direct
from fitcore.outputs.direct import BLOCK, CHUNK, DirectFile, direct_file


@pytest.fixture
def writes(monkeypatch):
    """Every ``os.write`` of the module: (length, whether the descriptor was open around the cache)."""
    seen = []
    real = os.write

    def recording(fd, data):
        import fcntl
        seen.append((len(data), bool(fcntl.fcntl(fd, fcntl.F_GETFL) & getattr(os, "O_DIRECT", 0))))
        return real(fd, data)
    monkeypatch.setattr(direct.os, "write", recording)
    return seen


def _pieces(seed: int, total: int) -> list[bytes]:
    rng = random.Random(seed)
    out, left = [], total
    while left:  # sizes of a few bytes to past a whole buffer, as pyarrow's page headers and pages are
        size = min(left, rng.choice([0, 1, 7, 4095, 4096, 4097, 65_536, 1 << 20, CHUNK - 3, CHUNK + 5]))
        out.append(rng.randbytes(size))
        left -= size
    return out


def _open_direct(path):
    path.write_bytes(b"")
    sink = direct_file(str(path))
    if sink is None:
        pytest.skip("this file system is not written around the page cache (no O_DIRECT)")
    return sink


@pytest.mark.parametrize("total", [0, 1, BLOCK, BLOCK + 1, CHUNK, CHUNK + BLOCK - 1, 2 * CHUNK + 12_345])
def test_every_byte_lands_in_order_and_every_write_around_the_cache_is_aligned(tmp_path, writes, total):
    path = tmp_path / "out.bin"
    sink = _open_direct(path)
    pieces = _pieces(total, total)
    for piece in pieces:
        assert sink.write(piece) == len(piece)
    sink.close()
    assert path.read_bytes() == b"".join(pieces)
    assert sum(n for n, _ in writes) == total
    around = [n for n, is_direct in writes if is_direct]
    assert all(n % BLOCK == 0 for n in around)
    assert sum(around) == total - total % BLOCK  # only the tail shorter than a block goes through the cache
    assert sink.closed


def test_a_write_refused_around_the_cache_and_a_short_one_send_the_rest_through_it(tmp_path, monkeypatch):
    """EINVAL (a file system that wants another alignment) and a write that stops off a block boundary: the
    rest through the page cache, no byte lost or repeated."""
    for trouble in ("refused", "short"):
        path = tmp_path / f"{trouble}.bin"
        path.write_bytes(b"")
        fd = os.open(path, os.O_WRONLY)  # a plain descriptor: the module's logic is the same
        sink = DirectFile(fd)
        real, calls = os.write, []

        def troubled(fd, data, real=real, calls=calls, trouble=trouble):
            calls.append(len(data))
            if len(calls) == 2:
                if trouble == "refused":
                    raise OSError(errno.EINVAL, "Invalid argument")
                return real(fd, bytes(data[:BLOCK + 100]))
            return real(fd, data)
        monkeypatch.setattr(direct.os, "write", troubled)
        monkeypatch.setattr(direct.DirectFile, "_through_cache",
                            lambda self: setattr(self, "direct", False))  # (the descriptor is not O_DIRECT)
        data = random.Random(5).randbytes(3 * CHUNK + 777)
        sink.write(data)
        assert not sink.direct
        sink.close()
        monkeypatch.undo()
        assert path.read_bytes() == data, trouble


def test_another_error_is_raised_and_a_discarded_sink_writes_nothing_more(tmp_path, monkeypatch):
    path = tmp_path / "full.bin"
    sink = _open_direct(path)
    monkeypatch.setattr(direct.os, "write", lambda fd, data: (_ for _ in ()).throw(OSError(errno.ENOSPC, "full")))
    with pytest.raises(OSError, match="full"):
        sink.write(b"x" * CHUNK)
    sink.discard()
    assert sink.closed
    with pytest.raises(OSError):
        os.fstat(sink.fd)  # the descriptor is closed
    sink.close()  # nothing left to do


def test_the_results_file_is_the_same_bytes_around_the_cache_or_through_it(tmp_path, monkeypatch):
    """A Parquet results file of several row groups written around the page cache equals, byte for byte, the one
    written through pyarrow's own file (the way where there is no O_DIRECT)."""
    from fitcore import fit_batch
    from fitcore.fit.settings import FitSettings
    from fitcore.results.write import prepared_results, ResultsTable
    from fitcore.review.flags import diagnose
    from tests.bench.invented import invented_dataset
    probe = _open_direct(tmp_path / "probe")
    probe.close()
    results = fit_batch(invented_dataset(300, 40, seed=3), FitSettings())
    diagnosis = diagnose(results)
    whole = ResultsTable.slices
    monkeypatch.setattr(ResultsTable, "slices", lambda self, series=None: whole(self, 70))  # 5 row groups
    opened = []
    real_open = direct.direct_file
    monkeypatch.setattr(direct, "direct_file", lambda name: opened.append(name) or real_open(name))
    around = tmp_path / "around.parquet"
    atomic_write(around, prepared_results(results, around, diagnosis)[0], by_name=True)
    monkeypatch.setattr(direct, "direct_file", lambda name: None)
    through = tmp_path / "through.parquet"
    atomic_write(through, prepared_results(results, through, diagnosis)[0], by_name=True)
    assert len(opened) == 1 and around.read_bytes() == through.read_bytes()
    assert around.stat().st_size > CHUNK // 64  # (several writes' worth, a tail off the block)
