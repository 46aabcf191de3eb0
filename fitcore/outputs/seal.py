"""Seals: the SHA-256 of an output as written, kept with it, so that a later run replaces only an output pricefold
wrote and nobody changed since (a report page's generator tag, or an export's header and shape, let an edited file
be written over).  A page carries its seal inside it; an export beside its bytes (``seal_file``)."""
from __future__ import annotations

import errno
import hashlib
import os
import re

BLANK = "0" * 64
TAG = '<meta name="pricefold-seal" content="sha256:{}">'
_FOUND = re.compile(rb'<meta name="pricefold-seal" content="sha256:([0-9a-f]{64})">')


def blank_tag() -> str:
    """The tag a page holds before ``seal`` fills it in."""
    return TAG.format(BLANK)


def seal(page: str) -> str:
    """``page`` (holding ``blank_tag`` once) with its tag holding the SHA-256 of the page as it was."""
    digest = hashlib.sha256(page.encode("utf-8")).hexdigest()
    return page.replace(blank_tag(), TAG.format(digest), 1)


def intact(content: bytes) -> bool | None:
    """Does a sealed page still hash as its seal says?  None: no seal (a page written before seals)."""
    found = _FOUND.search(content)
    if found is None:
        return None
    blank = content[:found.start(1)] + BLANK.encode() + content[found.end(1):]
    return hashlib.sha256(blank).hexdigest().encode() == found.group(1)


# A CSV cannot carry its own digest: an export's goes beside its bytes, in an extended attribute (Linux; where
# the system keeps none, an export is judged by its shape alone, ``guard._export_shaped``).
XATTR = "user.pricefold.sha256"


def seal_file(path, digest: str) -> None:
    """Record ``digest`` (the SHA-256 of what was written) on the file ``path`` (before it is put in place)."""
    try:
        os.setxattr(path, XATTR, digest.encode("ascii"))
    except (AttributeError, OSError):  # no extended attributes on this system or file system
        pass


def file_sealed(path) -> bool | None:
    """True: ``path`` carries a seal and still hashes as it says; False: not (``seal_state``); None: no seals here."""
    state = seal_state(path)
    return None if state is None else state == "intact"


def seal_state(path) -> str | None:
    """'intact' (``path`` hashes as its seal says), 'changed' (it carries another), 'absent' (it carries none, on a
    file system that keeps them: edited by a tool that wrote a new file, copied, or written before seals); None:
    no seals here."""
    try:
        recorded = os.getxattr(path, XATTR)
    except AttributeError:
        return None
    except OSError as exc:
        return "absent" if exc.errno == errno.ENODATA else None
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return "intact" if digest.hexdigest().encode("ascii") == recorded else "changed"
