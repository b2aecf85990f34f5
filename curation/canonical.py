"""Canonical JSON (RFC 8785), the text the ledger hashes: the reference and a fast path.

The reference is the rfc8785 package: `canonical(obj)` is `rfc8785.dumps(plain(obj))`. The
ledger writes tens of thousands of rows in a bulk import, and the reference spends most of
an import's time, so `encode` writes the same text itself for the values rows hold (str,
int, float, bool, None, dict, list, datetime) and hands anything else to the reference
(tests/ledger/test_canonical.py compares the two on random values).
"""

from __future__ import annotations

import json
import re
from collections.abc import Mapping, Sequence
from datetime import UTC, date, datetime
from decimal import Decimal
from enum import Enum
from operator import attrgetter, methodcaller
from typing import Any

import rfc8785


def plain(value: Any) -> Any:
    """A JSON-ready form of a column value; timestamps become UTC ISO 8601."""
    if isinstance(value, datetime):
        if value.tzinfo is None:
            value = value.replace(tzinfo=UTC)
        return value.astimezone(UTC).isoformat()
    if isinstance(value, date):
        return value.isoformat()
    if isinstance(value, Enum):
        return plain(value.value)
    if isinstance(value, Decimal):
        return float(value)
    if isinstance(value, bytes):
        return value.hex()
    if isinstance(value, Mapping):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [plain(v) for v in value]
    return value


#: a JSON string with the escapes RFC 8785 section 3.2.2.2 asks for: the standard library's
#: encoder (without ASCII escaping) writes \b \t \n \f \r \" \\ and \u00xx in lower case
string = json.encoder.encode_basestring
_SURROGATES = re.compile("[\ud800-\udfff]")
#: JSON numbers are IEEE doubles; RFC 8785 refuses integers beyond these
SAFE_INT = 2**53 - 1


class Unusual(Exception):
    """A value the fast encoder leaves to the reference implementation."""


def _float(f: float) -> str:
    """ECMAScript's Number::toString (RFC 8785 section 3.2.2.3) from Python's shortest repr."""
    if f == 0:
        return "0"
    text = repr(f)
    if "e" not in text:
        if "n" in text:  # inf, nan: the reference refuses them
            raise Unusual
        return text.removesuffix(".0")
    # repr writes an exponent outside 1e-4..1e16; ECMAScript only outside 1e-6..1e21
    mantissa, _, exponent = text.partition("e")
    sign, digits = ("-", mantissa[1:]) if f < 0 else ("", mantissa)
    digits = digits.replace(".", "")
    k, n = len(digits), int(exponent) + 1
    if k <= n <= 21:
        return sign + digits + "0" * (n - k)
    if -6 < n <= 0:
        return sign + "0." + "0" * -n + digits
    point = digits[0] + ("." + digits[1:] if k > 1 else "")
    return f"{sign}{point}e{'+' if n > 1 else '-'}{abs(n - 1)}"


def utf16(key: str) -> bytes:
    """A key as RFC 8785 sorts it: by its UTF-16 code units."""
    return key.encode("utf-16-be", "surrogatepass")


def encode(value: Any) -> str:
    """Canonical JSON of a plain value; Unusual for anything the reference must decide."""
    kind = type(value)
    if kind is str:
        if value.isascii() or not _SURROGATES.search(value):
            return string(value)
        raise Unusual
    if value is None:
        return "null"
    if kind is int:
        if -SAFE_INT <= value <= SAFE_INT:
            return str(value)
        raise Unusual
    if kind is float:
        return _float(value)
    if kind is bool:
        return "true" if value else "false"
    if kind is dict:
        if not value:
            return "{}"
        if any(type(k) is not str for k in value):
            raise Unusual
        # RFC 8785 sorts keys by UTF-16 code units; for ASCII keys that is code-point order
        keys = sorted(value) if all(k.isascii() for k in value) else sorted(value, key=utf16)
        return "{" + ",".join([encode(k) + ":" + encode(value[k]) for k in keys]) + "}"
    if kind is datetime:
        return '"' + plain(value) + '"'
    if kind is list or kind is tuple:
        return "[" + ",".join([encode(v) for v in value]) + "]"
    raise Unusual


def canonical(obj: Any) -> str:
    """RFC 8785 canonical JSON text of a plain object."""
    try:
        return encode(obj)
    except Unusual:
        return rfc8785.dumps(plain(obj)).decode("utf-8")


#: types whose equal values always encode alike (0.0 and -0.0 both as 0)
_BY_VALUE = frozenset({str, int, bool, float, datetime})
_NONE = frozenset({type(None)})
_TO_UTC = methodcaller("astimezone", UTC)


def encode_column(values: Sequence[Any]) -> list[str]:
    """encode() of every value of a column (Unusual as encode).

    Each distinct value (or shared object) is encoded once, and a column of many distinct
    ints, ASCII strings or aware timestamps by the standard library's C functions: the
    rows of a bulk write repeat most of their values.
    """
    kinds = set(map(type, values))
    if kinds == _NONE:
        return ["null"] * len(values)
    # equal times in one zone either side of a clock change (fold) are different instants
    if len(kinds - _NONE) <= 1 and kinds - _NONE <= _BY_VALUE and not (
            datetime in kinds and any(getattr(v, "fold", 0) for v in values)):
        distinct = set(values)
        if len(distinct) * 4 > len(values):
            if kinds == {str} and all(map(str.isascii, values)):
                return list(map(string, values))
            if kinds == {int} and -SAFE_INT <= min(values) and max(values) <= SAFE_INT:
                return list(map(str, values))
            if kinds == {datetime} and None not in map(attrgetter("tzinfo"), values):
                # as plain() writes them: UTC, ISO 8601
                return list(map('"{}"'.format, map(datetime.isoformat, map(_TO_UTC, values))))
        text = {v: encode(v) for v in distinct}
        return [*text.values()] * len(values) if len(text) == 1 else list(
            map(text.__getitem__, values))
    by_id = dict(zip(map(id, values), values))
    text = {k: encode(v) for k, v in by_id.items()}
    return [*text.values()] * len(values) if len(text) == 1 else list(
        map(text.__getitem__, map(id, values)))
