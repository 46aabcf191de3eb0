"""A report page's seal: the SHA-256 of the page as written, inside the page, so that a later run replaces only a
page pricefold wrote and nobody changed since (the generator tag alone let an edited page be written over)."""
from __future__ import annotations

import hashlib
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
