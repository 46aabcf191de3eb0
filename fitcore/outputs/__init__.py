"""Writing outputs safely: one atomic writer for every file pricefold writes, and the guard that
stops a command before it could write over one of its inputs, a ledger, or a file it did not make.

    atomic   ``atomic_write`` (temporary file, fsync, rename), ``Batch`` (several files staged, then
             renamed in order), the file mode kept or taken from the umask, dead writers' leftovers removed
    guard    ``check_outputs``: every output against every input (same file, inside a folder), the
             folder it goes to, and what an existing output holds

May import: the shared ``errors`` only.
"""
from .atomic import Batch, Staged, atomic_write, remove_leftovers, staging_folder, temp_path
from .guard import check_not_input, check_outputs, is_own, remove_own

__all__ = ["Batch", "Staged", "atomic_write", "check_not_input", "check_outputs", "is_own", "remove_leftovers",
           "remove_own", "staging_folder", "temp_path"]
