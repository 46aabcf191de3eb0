"""Writing outputs safely: one atomic writer for every file pricefold writes, and the guard that
stops a command before it could write over one of its inputs, a ledger, or a file it did not make.

    atomic   ``atomic_write`` (temporary file, fsync, rename), the file mode kept or taken from the umask, dead
             writers' leftovers removed
    batch    ``Batch``: several files staged, then put in place as one step with earlier ones removed
    journal  the batch's redo journal: a batch cut short by ``kill -9`` finished by the next writer
             (``finish_batches``), or said by a reader (``unfinished``)
    guard    ``check_outputs``: every output against every input (same file, inside a folder), the
             folder it goes to, and what an existing output holds
    direct   ``direct_file``: a large new file written around the page cache (Linux ``O_DIRECT``)

May import: the shared ``errors`` only.
"""
from .atomic import Staged, atomic_write, remove_leftovers, staging_folder, temp_path
from .batch import Batch
from .guard import check_not_input, check_outputs, is_own
from .journal import finish_batches, unfinished

__all__ = ["Batch", "Staged", "atomic_write", "check_not_input", "check_outputs", "finish_batches", "is_own",
           "remove_leftovers", "staging_folder", "temp_path", "unfinished"]
