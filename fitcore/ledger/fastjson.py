"""JSON for the ledger through orjson where, and only where, it gives exactly what the standard library gives.

The ledger's bytes and the values read from them are defined by Python's ``json`` module (canonical JSON:
sorted keys, no spaces, UTF-8, ``repr`` of floats).  orjson parses and encodes 3–4× faster; it agrees
with the standard library on every value it accepts except these, which are sent to ``json`` instead:

- parsing: an integer literal beyond 64 bits (orjson reads it as a float) — any chunk that may hold one
  (19 digits in a row after a character a number can follow) is parsed by ``json``; anything orjson
  refuses (NaN, a byte-order mark, lone surrogates, numbers too large for a float) is parsed by ``json``;
- encoding: floats below 1e-4 (orjson writes ``0.00001`` and ``1.5e-7`` where ``repr`` writes ``1e-05``
  and ``1.5e-07``), NaN and infinities (orjson writes ``null``), and every type ``json`` does not encode
  as it stands (subclasses, dates, dataclasses, tuples, numpy scalars).  An encoding is kept only when it
  holds neither ``e-`` nor ``0.0000`` and parses back equal to the value; otherwise ``json`` encodes it.

``tests/fitcore/test_ledger_fastjson.py`` compares both ways on random floats of every magnitude, every
code point in keys and values, and every record of the test ledgers.
"""
from __future__ import annotations

import json

import orjson

_FINITE = json.JSONEncoder(sort_keys=True, ensure_ascii=False, separators=(",", ":"), allow_nan=False)
_ANY = json.JSONEncoder(sort_keys=True, ensure_ascii=False, separators=(",", ":"))
_OPTIONS = (orjson.OPT_SORT_KEYS | orjson.OPT_PASSTHROUGH_SUBCLASS | orjson.OPT_PASSTHROUGH_DATETIME
            | orjson.OPT_PASSTHROUGH_DATACLASS)
# Digits to "0", the characters a number can follow to ":", everything else to "x": one search then
# finds any run of 19 digits that may be an integer literal.
_TABLE = bytes(ord("0") if chr(c).isdigit() and c < 128 else ord(":") if bytes([c]) in b":,[- \t\r\n" else ord("x")
               for c in range(256))
_LONG = b":" + b"0" * 19


def canonical_text(value) -> str:
    """Sorted keys, no spaces, no ASCII escaping, as ``json.dumps`` with those settings (NaN as ``NaN``;
    ``TypeError`` for what is not plain JSON)."""
    body = _fast(value)
    return body.decode("utf-8") if body is not None else _ANY.encode(value)


def text_object(value: dict) -> str:
    """``canonical_text`` of a mapping of text to text (exact ``str`` keys and values, checked by the caller):
    no number in it, so orjson's encoding is json's (lone surrogates, which orjson refuses, go to json)."""
    try:
        return orjson.dumps(value, option=orjson.OPT_SORT_KEYS).decode("utf-8")
    except orjson.JSONEncodeError:
        return _ANY.encode(value)


def canonical_bytes(value) -> bytes:
    """The same in UTF-8, for finite numbers only (``ValueError`` for NaN or infinity).

    orjson's result is copied: it keeps the capacity of its growing buffer (7 KiB for a 0.5 KiB signed
    model), so 100,000 kept as they came held 0.7 GB; the copy holds what it says."""
    body = _fast(value)
    return bytes(memoryview(body)) if body is not None else _FINITE.encode(value).encode("utf-8")


def _fast(value) -> bytes | None:
    try:
        body = orjson.dumps(value, default=_refuse, option=_OPTIONS)
    except (orjson.JSONEncodeError, TypeError):
        return None
    if b"e-" in body or b"0.0000" in body or orjson.loads(body) != value:
        return None
    return body


def _refuse(value):
    raise TypeError  # not plain JSON for orjson: the standard library decides (and says why)


def parse_lines(lines: list[bytes], chunk: bytes | None = None) -> list[dict | None]:
    """Each line's JSON object, None where a line is not one.  ``chunk``: the lines' bytes as one piece
    (``lines`` is ``chunk`` split at newlines), when the caller has it."""
    if _LONG in (b"\n".join(lines) if chunk is None else chunk).translate(_TABLE):
        return [_parse_one(line) for line in lines]
    out = []
    loads, failed = orjson.loads, orjson.JSONDecodeError
    for line in lines:
        try:
            value = loads(line)
        except failed:
            value = _parse_one(line)
        out.append(value if type(value) is dict else None)
    return out


def _parse_one(line: bytes) -> dict | None:
    try:
        value = json.loads(line)
    except (ValueError, RecursionError):  # nested past the parser's depth (a hostile line): not a record
        return None
    return value if type(value) is dict else None
