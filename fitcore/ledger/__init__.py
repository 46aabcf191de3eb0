"""The sign-off ledger: the chained, append-only record of decisions (``chain``) and its replay
into each series' status (``replay``).  The chain's API is this room's: ``ledger.append``,
``ledger.verify``, ``ledger.read``, …

May import: ``results``, ``review``, ``fit``, ``data`` and the shared modules.
"""
from .chain import (
                    ACTIONS,
                    GENESIS,
                    SCHEMA,
                    Entry,
                    Identity,
                    LedgerError,
                    Problem,
                    append,
                    canonical,
                    check_entry,
                    digest_of,
                    parse,
                    read,
                    results_digest,
                    verify,
)

__all__ = ["ACTIONS", "GENESIS", "SCHEMA", "Entry", "Identity", "LedgerError", "Problem", "append", "canonical",
           "check_entry", "digest_of", "parse", "read", "results_digest", "verify"]
