"""The ledger's JSON through orjson gives exactly what Python's standard ``json`` module gives.

The reference is the standard library itself (``json.dumps(sort_keys=True, separators=(",", ":"),
ensure_ascii=False, allow_nan=False)`` and ``json.loads``), which defined every ledger byte written
so far; the inputs are random floats of every magnitude, every Unicode code point, values orjson
would write differently or read differently, and every record of the test ledgers.
"""
from __future__ import annotations

import datetime
import enum
import json
import math
import random
import struct
import uuid

import numpy as np
import pytest

from fitcore.ledger.fastjson import canonical_bytes, canonical_text, parse_lines, text_object
from fitcore.ledger.records import SCHEMA
from tests.fitcore.ledger_support import V1


def reference(value, allow_nan=False) -> bytes:
    return json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      allow_nan=allow_nan).encode("utf-8")


def test_floats_of_every_magnitude_encode_as_repr():
    rng = random.Random(7)
    values = [struct.unpack("<d", rng.getrandbits(64).to_bytes(8, "little"))[0] for _ in range(50_000)]
    values += [float(f"{m}e{e}") for e in range(-325, 309) for m in ("1", "1.5", "9.999999999999999", "4.9406564584124654")]
    values += [0.0, -0.0, 1e-4, 9.999999999999999e-05, 1e16, 9999999999999998.0, 5e-324, 1.7976931348623157e308]
    values = [v for v in values if math.isfinite(v)]
    for start in range(0, len(values), 50):  # in lists and in objects, as records hold them
        chunk = values[start:start + 50]
        assert canonical_bytes(chunk) == reference(chunk)
        assert canonical_bytes({"v": chunk, "w": {"x": chunk[0]}}) == reference({"v": chunk, "w": {"x": chunk[0]}})
    assert canonical_bytes([1e-05, 1.5e-07]) == b"[1e-05,1.5e-07]"  # where orjson alone writes 0.00001, 1.5e-7


def test_every_code_point_in_keys_and_values_and_key_order():
    for start in range(0, 0x110000, 4096):
        chars = [chr(c) for c in range(start, min(start + 4096, 0x110000)) if not 0xD800 <= c <= 0xDFFF]
        value = {c: c + "x" for c in chars}
        assert canonical_bytes(value) == reference(value)
        assert canonical_text({"k": "".join(chars)}) == reference({"k": "".join(chars)}).decode("utf-8")
        assert text_object(value) == reference(value).decode("utf-8")
    assert text_object({"b": "\ud800", "a": ""}) == json.dumps({"b": "\ud800", "a": ""}, sort_keys=True,
                                                               separators=(",", ":"), ensure_ascii=False)


class Colour(enum.Enum):
    RED = "red"


class Size(enum.IntEnum):
    ONE = 1


@pytest.mark.parametrize("value", [
    {"a": (1, 2)}, {"a": np.float64(0.1)}, {"a": True, "b": None, "c": 1}, {"a": 2 ** 70},
    {"a": -(2 ** 64)}, {"a": Size.ONE}, {"a": [[[[]]]], "b": {}}, {"a": "e-mail 0.00001"}, {1: "x"},
])
def test_values_orjson_writes_otherwise_or_refuses_come_out_as_json_writes_them(value):
    assert canonical_bytes(value) == reference(value)


@pytest.mark.parametrize("value", [{"a": math.nan}, {"a": [math.inf]}, {"a": -math.inf}])
def test_non_finite_numbers_are_refused_as_json_refuses_them(value):
    with pytest.raises(ValueError):
        reference(value)
    with pytest.raises(ValueError):
        canonical_bytes(value)
    assert canonical_text(value) == json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=False)


@pytest.mark.parametrize("value", [{"a": datetime.date(2026, 1, 1)}, {"a": uuid.UUID(int=1)}, {"a": Colour.RED},
                                   {"a": {1, 2}}, {"a": "\ud800"}, {1: "x", "b": "y"}, {"a": np.int64(3)}])
def test_what_json_refuses_is_refused(value):
    with pytest.raises((TypeError, ValueError)) as expected:
        reference(value)
    with pytest.raises(expected.type):
        canonical_bytes(value)


LINES = [b'{"a":1E400}', b'{"a":-1e400}', b'{"a":1,"a":2}', b'{"a":NaN}', b'{"a":123456789012345678901234567890}',
         b'{"a":18446744073709551615}', b'{"a":-9223372036854775809}', b'{"a": 12345678901234567890}',
         b'{"a":[12345678901234567890123]}', b'{"a":"\\ud800"}', b'{"a":"\xed\xa0\x80"}', b'\xef\xbb\xbf{"a":1}',
         b'{"a":1.0}', b'{"a":-0}', b'{"a":-0.0}', b'{"a":1e5}', b'{"a":"\t"}', b' {"a":1} ', b'{"a":0.1e-400}',
         b'{"a":01}', b'{"a":"\x7f"}', b'{"a":1.}', b'[1]', b'"x"', b'', b'{"a":[1,2,]}', b'{"a":tru}',
         b'{"a":1}\x00', b'{"a":1234567890123456789.5}', b'{"a":"12345678901234567890123"}']


def json_record(line: bytes):
    try:
        value = json.loads(line)
    except ValueError:
        return None
    return value if type(value) is dict else None


@pytest.mark.parametrize("line", LINES)
def test_each_line_parses_as_json_parses_it(line):
    for lines in ([line], [b'{"b":2}', line]):  # alone, and in a chunk where orjson reads the rest
        got = parse_lines(lines, b"\n".join(lines) + b"\n")
        assert repr(got) == repr([json_record(one) for one in lines])  # repr: 1 == 1.0 == True for ==


def test_the_test_ledgers_read_and_encode_as_json_reads_and_encodes_them(tmp_path):
    from fitcore import ledger
    from tests.fitcore.ledger_support import ANA, entry
    path = tmp_path / "l.jsonl"
    signed = {"candidate": "poly2", "coef": [1e-05, 123.5, -2.5e-12], "cov_unscaled": [[1.0, 1e-300], [1e-300, 2.0]],
              "plan": {"price": 9.99, "volume": 1e20}}
    ledger.append(path, [entry("é\u2028\x00", signed=signed), entry("b", note="line\nbreak \"quoted\" e-mail")], ANA)
    for source in [path, V1 / "plain.jsonl", V1 / "keyed.jsonl"]:
        lines = source.read_bytes().split(b"\n")[:-1]
        records = parse_lines(lines, source.read_bytes())
        assert repr(records) == repr([json.loads(line) for line in lines])
        for line, record in zip(lines, records):
            assert canonical_bytes(record) == reference(record) == line  # a line is its record's canonical JSON
            assert record["schema"] in (SCHEMA, "pricefold-ledger/1")
