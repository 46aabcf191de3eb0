"""A large new file written around the page cache (Linux ``O_DIRECT``): the results' Parquet file.

A fresh process's writes into the page cache cost these VMs about 5 ms of kernel time a MiB whenever the pages
are cold (after a few idle seconds): 168 MB written and fsynced in 0.90–1.17 s, 0.59–0.82 s of it system time,
against 0.07–0.12 s written around the cache (three pairs of fresh processes, 4 s apart).  The file is read
back once, if at all, so nothing is lost by keeping it out of the cache.  The caller still fsyncs (the
disk's own cache, and the file's size).

``O_DIRECT`` wants each write's offset, length and memory aligned to the device's block; ``DirectFile`` gathers
what it is given in a page-aligned buffer and writes it a whole buffer at a time.  Where the file system has
no ``O_DIRECT`` (tmpfs before Linux 6.6, some FUSE file systems, other systems) ``direct_file`` gives None; where it refuses a write (``EINVAL``), the
rest goes through the page cache, as does the tail shorter than a block.
"""
from __future__ import annotations

import errno
import mmap
import os

BLOCK = 4096  # a multiple of every block size in use (512-byte and 4 KiB sectors, 4 KiB pages)
CHUNK = 8 << 20  # bytes gathered a write: 8 MiB (1 MiB: the same time; less means more system calls)


def direct_file(name: str) -> DirectFile | None:
    """``name`` (an existing, empty file: the atomic writer's temporary file) opened to be written around the
    page cache, or None where that cannot be."""
    flag = getattr(os, "O_DIRECT", 0)
    if not flag:
        return None
    try:
        fd = os.open(name, os.O_WRONLY | flag | getattr(os, "O_CLOEXEC", 0))
    except OSError:  # EINVAL: a file system without it; anything else, the buffered open will say
        return None
    return DirectFile(fd)


class DirectFile:
    """A binary sink for pyarrow (``write``, ``flush``, ``close``, ``closed``): whole ``CHUNK``s written around
    the page cache from a page-aligned buffer, the rest at ``close``.  Closing closes the descriptor."""

    def __init__(self, fd: int) -> None:
        self.fd, self.direct, self.closed, self.used = fd, True, False, 0
        self.buffer = mmap.mmap(-1, CHUNK)  # page-aligned, reused: its pages touched once
        self.view = memoryview(self.buffer)

    def write(self, data) -> int:
        data = memoryview(data).cast("B")
        at = 0
        while at < len(data):
            take = min(CHUNK - self.used, len(data) - at)
            self.view[self.used:self.used + take] = data[at:at + take]
            self.used, at = self.used + take, at + take
            if self.used == CHUNK:
                self._write_out(CHUNK)
        return len(data)

    def flush(self) -> None:
        """Nothing: whole buffers are written as they fill (a partial one would break the alignment)."""

    def close(self) -> None:
        """Write what is left (the whole blocks around the cache, the tail through it) and close."""
        if self.closed:
            return
        try:
            whole = self.used - self.used % BLOCK
            if whole:
                self._write_out(whole)
            if self.used:
                self._through_cache()
                self._write_out(self.used)
        finally:
            self.discard()

    def discard(self) -> None:
        """Close without writing what is left (a failed write: its file is removed)."""
        if not self.closed:
            self.closed = True
            self.view.release()
            self.buffer.close()
            os.close(self.fd)

    def _write_out(self, length: int) -> None:
        """Write the buffer's first ``length`` bytes, and move what follows them to its start."""
        done = 0
        while done < length:
            try:
                done += os.write(self.fd, self.view[done:length])
            except OSError as exc:
                if exc.errno != errno.EINVAL or not self.direct:
                    raise
                self._through_cache()  # refused around the cache (an alignment this file system wants)
                continue
            if done % BLOCK and self.direct:  # a short write off the alignment: the rest through the cache
                self._through_cache()
        rest = self.used - length
        self.view[:rest] = self.view[length:self.used]
        self.used = rest

    def _through_cache(self) -> None:
        if self.direct:
            import fcntl  # (only where there is O_DIRECT)
            fcntl.fcntl(self.fd, fcntl.F_SETFL, fcntl.fcntl(self.fd, fcntl.F_GETFL) & ~os.O_DIRECT)
            self.direct = False
