"""Columns of a results file read in a thread, so that what a screen needs first is back sooner."""
from __future__ import annotations

import numpy as np

from ..errors import DataError, first_line


class LaterColumns:
    """Columns of a results file read in a thread: ``soon`` ones at once (from construction on), the others
    (``names``) once started (``start``; the first use starts it too).  ``column(name)`` is a ``Later`` that
    waits for its read on first use; ``soon_ready`` and ``ready`` say whether the reads are done.  A file
    that fails to read then raises where a column is used.  One thread reads both, in turn, through the
    same handles: the columns are all the opened file's."""

    def __init__(self, parts: list, names: list[str], where: str, soon: list[str] = ()) -> None:
        """``parts``: the results file's parts, open (binary handles, closed once read); ``where``: its name."""
        import threading
        self.names, self.soon, self._parts, self._where = list(names), list(soon), parts, where
        self._tables: dict[str, object] = {}  # "soon" and "later": each group's table once read
        self._error = None
        self._soon_done, self._done, self._go = threading.Event(), threading.Event(), threading.Event()
        self._started = threading.Lock()  # guards the thread's start and ``_holding``
        self._thread, self._holding = None, False
        if self.soon:
            with self._started:
                self._begin()

    def _begin(self) -> None:
        """Start the thread (under ``_started``), counted as a read in progress from before it runs."""
        import threading
        if self._thread is None:
            self._hold(True)
            self._thread = threading.Thread(target=self._read, args=(self._parts,), name="pricefold-results",
                                            daemon=True)
            self._thread.start()

    def _hold(self, holding: bool) -> None:
        """Count this reader among the reads the interpreter's exit waits for, or not (under ``_started``)."""
        if holding != self._holding:
            (_reading.enter if holding else _reading.leave)()
            self._holding = holding

    def start(self) -> None:
        """Start reading the ``names`` (once; from any thread): triage starts it once the series around the
        cursor are fitted, or when a key needs these columns."""
        with self._started:
            self._go.set()
            if not self._done.is_set():
                self._hold(True)
            self._begin()

    def _read(self, parts) -> None:
        import pyarrow.parquet as pq
        try:
            readers = [pq.ParquetFile(part, page_checksum_verification=True) for part in parts]
            if self.soon:  # on Arrow's threads: done while the list's first frame is still being made
                self._tables["soon"] = _read_all(readers, self.soon, threads=True)
            with self._started:
                self._soon_done.set()
                if not self._go.is_set():  # idle until started: not a read the exit must wait for
                    self._hold(False)
            self._go.wait()
            self._tables["later"] = _read_all(readers, self.names)
        except Exception as exc:  # raised where a column is first used
            self._error = exc
        finally:
            for handle in parts:
                handle.close()
            with self._started:
                self._soon_done.set()
                self._done.set()
                self._hold(False)

    @property
    def soon_ready(self) -> bool:
        """The ``soon`` columns are read, and read whole."""
        return self._soon_done.is_set() and "soon" in self._tables

    @property
    def ready(self) -> bool:
        """Read, and read whole: after a failed read the columns never become usable (``table`` says why)."""
        return self._done.is_set() and self._error is None

    def wait(self) -> None:
        """Until the read is done, without starting it."""
        self._done.wait()

    def wait_soon(self) -> None:
        """Until the ``soon`` columns are read; a ``DataError`` if they could not be."""
        self._soon_done.wait()
        self._group("soon")

    def _group(self, group: str):
        if group not in self._tables:
            raise DataError(f"could not read the rest of the results ({first_line(self._error)})", path=self._where)
        return self._tables[group]

    def table(self):
        """The ``names`` columns (started if need be, waited for)."""
        self.start()
        self._done.wait()
        return self._group("later")

    def column(self, name: str) -> "Later":
        return Later(self, name)

    def _column(self, name: str):
        if name in self.soon:
            self.wait_soon()
            return self._group("soon").column(name)
        return self.table().column(name)


def _read_all(readers, names: list[str], threads: bool = False):
    import pyarrow as pa
    tables = [reader.read(columns=names, use_threads=threads) for reader in readers]
    return pa.concat_tables(tables, promote_options="permissive") if len(tables) > 1 else tables[0]


class _Reads:
    """Readers whose thread is reading (from before it starts to the end of its read, not while it waits to be
    started), for ``let_reads_end``: a daemon thread still inside Arrow (opening the file or reading it) when
    the interpreter exits is ended inside C++ (an abort), or waits forever for the interpreter lock while
    Arrow's thread pool, shut down after the interpreter, waits for that read (a script that opened results
    and ended at once died or hung)."""

    def __init__(self) -> None:
        import threading
        self.count, self.changed, self.registered = 0, threading.Condition(), False

    def enter(self) -> None:
        with self.changed:
            if not self.registered:
                import atexit
                atexit.register(self.let_reads_end)
                self.registered = True
            self.count += 1

    def leave(self) -> None:
        with self.changed:
            self.count -= 1
            self.changed.notify_all()

    def let_reads_end(self) -> None:
        """At exit: until the reads in progress are done (a read started after this is not waited for)."""
        with self.changed:
            self.changed.wait_for(lambda: self.count == 0, timeout=60)


_reading = _Reads()


class Later:
    """One column of ``LaterColumns``: behaves as the Arrow column once read (waiting for it if need be)."""

    def __init__(self, source: LaterColumns, name: str) -> None:
        self._source, self._name, self._column = source, name, None

    def _get(self):
        if self._column is None:
            self._column = self._source._column(self._name)
        return self._column

    def __getattr__(self, attribute):
        if attribute.startswith("_"):
            raise AttributeError(attribute)
        return getattr(self._get(), attribute)

    def __getitem__(self, index):
        return self._get()[index]

    def __len__(self) -> int:
        return len(self._get())


class Waiting(np.lib.mixins.NDArrayOperatorsMixin):
    """An array made from columns still being read (``make()``, called once, on first use, from any thread):
    behaves as that array — indexing, numpy functions and operators, its attributes — once made."""

    def __init__(self, make) -> None:
        import threading
        self._make, self._value, self._lock = make, None, threading.Lock()

    def _get(self) -> np.ndarray:
        if self._value is None:
            with self._lock:
                if self._value is None:
                    value = self._make()
                    value.flags.writeable = False
                    self._value = value
        return self._value

    def __array__(self, dtype=None, copy=None):
        value = self._get()
        return value if dtype is None else value.astype(dtype)

    def __array_ufunc__(self, ufunc, method, *inputs, **kwargs):
        inputs = tuple(x._get() if isinstance(x, Waiting) else x for x in inputs)
        return getattr(ufunc, method)(*inputs, **kwargs)

    def __getitem__(self, index):
        return self._get()[index]

    def __len__(self) -> int:
        return len(self._get())

    def __iter__(self):
        return iter(self._get())

    def __getattr__(self, attribute):
        if attribute.startswith("_"):
            raise AttributeError(attribute)
        return getattr(self._get(), attribute)
