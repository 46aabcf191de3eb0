"""Columns of a results file read in a thread, so that what a screen needs first is back sooner."""
from __future__ import annotations

from ..errors import DataError, first_line


class LaterColumns:
    """Columns of a results file read in a thread once started (``start``; the first use starts it too):
    ``column(name)`` is a ``Later`` that waits for the read on first use, ``ready`` says whether it is done.
    A file that fails to read then raises where used."""

    def __init__(self, parts: list, names: list[str], where: str) -> None:
        """``parts``: the results file's parts, open (binary handles, closed once read); ``where``: its name."""
        import threading
        self.names, self._parts, self._where, self._table, self._error = names, parts, where, None, None
        self._done, self._started = threading.Event(), threading.Lock()
        self._thread = None

    def start(self) -> None:
        """Start reading (once; from any thread): triage starts it once the list and the series around the
        cursor are drawn, or when a key needs these columns."""
        import threading
        with self._started:
            if self._thread is None:
                self._thread = threading.Thread(target=self._read, args=(self._parts,), name="pricefold-results",
                                                daemon=True)
                self._thread.start()

    def _read(self, parts) -> None:
        import pyarrow as pa
        import pyarrow.parquet as pq
        try:
            tables = [pq.ParquetFile(part, page_checksum_verification=True).read(columns=self.names, use_threads=False)
                      for part in parts]
            self._table = pa.concat_tables(tables, promote_options="permissive") if len(tables) > 1 else tables[0]
        except Exception as exc:  # raised where a column is first used
            self._error = exc
        finally:
            for handle in parts:
                handle.close()
            self._done.set()

    @property
    def ready(self) -> bool:
        """Read, and read whole: after a failed read the columns never become usable (``table`` says why)."""
        return self._done.is_set() and self._error is None

    def wait(self) -> None:
        """Until the read is done, without starting it."""
        self._done.wait()

    def table(self):
        self.start()
        self._done.wait()
        if self._error is not None:
            raise DataError(f"could not read the rest of the results ({first_line(self._error)})", path=self._where)
        return self._table

    def column(self, name: str) -> "Later":
        return Later(self, name)


class Later:
    """One column of ``LaterColumns``: behaves as the Arrow column once read (waiting for it if need be)."""

    def __init__(self, source: LaterColumns, name: str) -> None:
        self._source, self._name, self._column = source, name, None

    def _get(self):
        if self._column is None:
            self._column = self._source.table().column(self._name)
        return self._column

    def __getattr__(self, attribute):
        if attribute.startswith("_"):
            raise AttributeError(attribute)
        return getattr(self._get(), attribute)

    def __getitem__(self, index):
        return self._get()[index]

    def __len__(self) -> int:
        return len(self._get())
