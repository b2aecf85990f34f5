"""The fast canonical JSON against the reference: the rfc8785 package, byte for byte.

`canonical(obj)` is defined as `rfc8785.dumps(plain(obj))` (RFC 8785, JSON Canonicalization
Scheme; the package is an independent implementation of it). The ledger's format must not
move by a byte, so every value here is encoded both ways and compared, and whatever the
reference refuses must still be refused.
"""

from __future__ import annotations

import random
import struct
from datetime import UTC, date, datetime, timedelta, timezone
from decimal import Decimal
from enum import Enum, IntEnum
from types import MappingProxyType
from typing import Any
from zoneinfo import ZoneInfo

import pytest
import rfc8785
from hypothesis import given, settings
from hypothesis import strategies as st

from curation.canonical import Unusual, canonical, encode, encode_column, plain


def reference(value: Any) -> str:
    """The rfc8785 package's canonical text of plain(value)."""
    return rfc8785.dumps(plain(value)).decode("utf-8")


def same_as_reference(value: Any) -> None:
    """canonical(value) is the reference's text, or both refuse the value alike."""
    try:
        expected = reference(value)
    except Exception as refused:  # noqa: BLE001 - whatever the reference raises, we must too
        with pytest.raises(type(refused)):
            canonical(value)
        return
    assert canonical(value) == expected


# Floats where ECMAScript's Number::toString switches notation or rounds (RFC 8785 section
# 3.2.2.3 and its Appendix B sample values, from memory), and the edges of the double range.
FLOATS = [
    0.0, -0.0, 0.1, -0.1, 0.5, 1.0, -1.0, 5.0, 1e-7, 1e-6, 1.5e-6, 1e-5, 9.999e-5, 1e-4,
    0.000123, 1e16, 1.5e16, 1e20, 1e21, 1.5e21, 1e22, -1e21, 1e30, 1e100, 1e-100, 5e-324,
    -5e-324, 2.2250738585072014e-308, 1.7976931348623157e308, 333333333.33333329, 4.5,
    2e-3, 1e-27, 9007199254740992.0, 9007199254740993.0, 295147905179352830000.0,
    123456789012345680000.0, 1.2345678901234567e20, 0.30000000000000004, 100.0, 1e15 + 0.3,
    float("inf"), float("-inf"), float("nan"),
]


@pytest.mark.parametrize("number", FLOATS, ids=repr)
def test_floats_match_the_reference(number: float) -> None:
    same_as_reference(number)
    same_as_reference({"v": [number, -number]})


def test_random_doubles_match_the_reference() -> None:
    # Every bit pattern is a double (or a NaN): exponents, subnormals and signs at random.
    rng = random.Random(8785)
    for _ in range(20_000):
        (number,) = struct.unpack("<d", rng.getrandbits(64).to_bytes(8, "little"))
        same_as_reference(number)


@pytest.mark.parametrize("number", [0, 1, -1, 2**53 - 1, -(2**53 - 1), 2**53, -(2**53), 10**30])
def test_integers_match_the_reference(number: int) -> None:
    same_as_reference(number)


# Every control character, the characters JSON escapes, the line and paragraph separators
# (JSON does not escape them), a byte-order mark, non-BMP characters, and lone surrogates
# (which the reference refuses as not UTF-8).
STRINGS = ["", "plain", '"quoted" \\back\\slash/', "".join(map(chr, range(0x80))),
           "\u2028\u2029\ufeff\u00e9\u20ac", "\U0001f600 \U00010000 \U0010ffff", "\ud800",
           "a\udfffb", "caf\u00e9 \u00b5m \u00c5"]


@pytest.mark.parametrize("text", STRINGS, ids=repr)
def test_strings_match_the_reference(text: str) -> None:
    same_as_reference(text)
    same_as_reference({text: text})


def test_keys_sort_by_utf16_code_units_as_the_reference_does() -> None:
    # U+FB33 sorts before U+1F600 by code point, after it by UTF-16 (0xD83D < 0xFB33).
    keys = ["\ufb33", "\U0001f600", "\u00f6", "\u20ac", "1", "\r", "\u0080", "Z", "a", "\uffff",
            "\U00010000", "\ue000", "\ud7ff"]
    rng = random.Random(16)
    for _ in range(50):
        rng.shuffle(keys)
        obj = {k: {k2: i for i, k2 in enumerate(keys)} for k in keys}
        same_as_reference(obj)


class Colour(Enum):
    RED = "red"


class Level(IntEnum):
    HIGH = 3


class Code(str):
    pass


ODD_VALUES = [
    datetime(2026, 3, 2, 10, 0, tzinfo=timezone(timedelta(hours=2))),
    datetime(2026, 3, 2, 10, 0, 0, 5),  # naive: read as UTC
    date(2026, 3, 2), Colour.RED, Level.HIGH, Decimal("1.50"), b"\x00\xff", (1, "a"),
    MappingProxyType({"b": 1, "a": 2}), Code("x"), {1: "int key"}, {"a": {3, 4}},
    {"a": 1, 2: "mixed keys"}, {True: 1}, object(),
]


@pytest.mark.parametrize("value", ODD_VALUES, ids=repr)
def test_other_types_go_to_the_reference(value: Any) -> None:
    same_as_reference(value)
    same_as_reference({"nested": [value]})


json_leaves = (st.none() | st.booleans() | st.integers(-(2**60), 2**60)
               | st.floats(allow_nan=True, allow_infinity=True) | st.text(max_size=12)
               | st.datetimes(timezones=st.none() | st.timezones()))
json_values = st.recursive(
    json_leaves,
    lambda children: st.lists(children, max_size=4) | st.dictionaries(
        st.text(max_size=6), children, max_size=4),
    max_leaves=20)


@settings(max_examples=400, deadline=None)
@given(json_values)
def test_random_values_match_the_reference(value: Any) -> None:
    same_as_reference(value)


def column_reference(values: list[Any]) -> list[str]:
    return [reference(v) for v in values]


SHARED = {"shared": 1.5}
AT = datetime(2026, 3, 2, 8, 0, tzinfo=UTC)
FALL_BACK = datetime(2026, 10, 25, 2, 30, tzinfo=ZoneInfo("Europe/Berlin"))
COLUMNS = [
    [None] * 5, ["a", "b", "a", None, "é"], [1, 2, 3, 4, 5], [1, 1, 1, 1, 2**53 - 1],
    [True, False, True, True], [0.0, -0.0, 0.0, -0.0, 0.0], [1.5, 1.5, 2.5, 1e21, None],
    [SHARED, SHARED, {}, {"b": [1, 2]}, SHARED], [AT, AT, AT + timedelta(minutes=1), None],
    [AT + timedelta(minutes=k) for k in range(20)],  # distinct aware times: the C path
    [AT, AT.astimezone(timezone(timedelta(hours=-5))), AT.replace(tzinfo=None)],
    [str(k) for k in range(20)], list(range(20)), [1, 1.0, True, 1, 1.0],
    # the same wall-clock time twice as the clocks go back: equal, yet an hour apart
    [FALL_BACK, FALL_BACK.replace(fold=1), FALL_BACK, FALL_BACK.replace(fold=1)],
    ["x", 1, None, 2.5, True, {"k": "v"}, ["l"], AT],
]


@pytest.mark.parametrize("values", COLUMNS, ids=repr)
def test_columns_match_the_reference_value_by_value(values: list[Any]) -> None:
    assert encode_column(values) == column_reference(values)


@pytest.mark.parametrize("values", [[1, 2**53], ["ok", "\ud800"], [float("nan"), 1.0],
                                    [Colour.RED, "red"], [Decimal(1)] * 3])
def test_columns_leave_what_the_reference_must_decide(values: list[Any]) -> None:
    with pytest.raises(Unusual):
        encode_column(values)
    assert any(_unusual(v) for v in values)


@settings(max_examples=300, deadline=None)
@given(st.lists(json_leaves | st.sampled_from([SHARED, AT, -0.0, 0.0, 1, 1.0, True]),
                max_size=30))
def test_random_columns_match_the_reference(values: list[Any]) -> None:
    try:
        got = encode_column(values)
    except Unusual:
        assert any(_unusual(v) for v in values)
        return
    assert got == column_reference(values)


def _unusual(value: Any) -> bool:
    try:
        encode(value)
    except Unusual:
        return True
    return False
