"""One pint registry for the catalogue, and a safe parser for "30 kV"-style input."""

from __future__ import annotations

import math
import re
from functools import lru_cache

import pint

#: the registry every technique unit is parsed with; the cache would write to the user's disk
ureg: pint.UnitRegistry[float] = pint.UnitRegistry(cache_folder=None)
# counts of particles per area: "1e16 ions/cm²" is a fluence, "electrons/Å²" a charge per area
ureg.define("ion = 1 = ions")
ureg.define("electron = elementary_charge")

_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")
# a unit is names joined by * or /, each with at most a one-digit exponent: this keeps pint's
# expression evaluator away from input such as "m**(10**10**10)", which would never return
_UNIT = re.compile(
    r"^\(?\s*[A-Za-zµμÅ°Ω_%]+(?:\s*(?:\^|\*\*)\s*-?\d)?"
    r"(?:\s*[*/ ]\s*[A-Za-zµμÅ°Ω_]+(?:\s*(?:\^|\*\*)\s*-?\d)?)*\s*\)?$"
)
_SUPERSCRIPTS = str.maketrans({"²": "^2", "³": "^3"})
# "e⁻/Å²" and "e-/nm2" are how people write an electron count; pint knows "e" as the charge
_ELECTRON = re.compile(r"(?<![A-Za-z])e[-⁻](?=\s*/|\s*$)")
_BARE_POWER = re.compile(r"([A-Za-zµμÅ])([23])(?![0-9])")


class UnitError(ValueError):
    """Text that is not a number with an optional unit, or a unit pint does not know."""


def normalise_unit_text(text: str) -> str:
    """Rewrite the trade's shorthand (e⁻, superscripts, cm2) into pint's spelling."""
    text = _ELECTRON.sub("e", text.strip()).translate(_SUPERSCRIPTS)
    return _BARE_POWER.sub(r"\1^\2", text)


# Parsing, comparing and converting units costs pint tens of microseconds each time, and an
# import of many rows asks the same few questions over and over; the answers never change
# (units are immutable), so they are remembered. Refusals raise and are not remembered.
@lru_cache(maxsize=1024)
def parse_unit(text: str) -> pint.Unit:
    """The pint unit a string names; UnitError when it is not a plain unit expression."""
    cleaned = normalise_unit_text(text)
    if len(cleaned) > 40 or not _UNIT.match(cleaned):
        raise UnitError(f"not a unit: {text!r}")
    try:
        return ureg.parse_units(cleaned)
    except (pint.errors.PintError, AttributeError, TypeError, ValueError, SyntaxError) as exc:
        raise UnitError(f"unknown unit {text!r}") from exc


def split_value(text: str) -> tuple[float, pint.Unit | None]:
    """A number and the unit written after it ("0.5 nA" → 0.5, nA); None when no unit."""
    match = _NUMBER.match(text)
    if not match:
        raise UnitError(f"not a number: {text!r}")
    number = float(match.group(1))
    if not math.isfinite(number):
        raise UnitError(f"not a finite number: {text!r}")
    rest = match.group(2)
    return number, (parse_unit(rest) if rest else None)


@lru_cache(maxsize=1024)
def same_kind(a: pint.Unit, b: pint.Unit) -> bool:
    """True when a converts to b; tells angles from plain ratios, which pint both calls 1."""
    return ureg.get_root_units(a)[1] == ureg.get_root_units(b)[1]


def convert(value: float, source: pint.Unit, target: pint.Unit) -> float:
    """The value in the target unit; pint handles offset units such as °C → K."""
    if value == 0:  # the cache below cannot tell -0.0 from 0.0
        return _convert(value, source, target)
    return _remembered_convert(value, source, target)


def _convert(value: float, source: pint.Unit, target: pint.Unit) -> float:
    return float(ureg.Quantity(value, source).to(target).magnitude)


_remembered_convert = lru_cache(maxsize=4096)(_convert)


@lru_cache(maxsize=1024)
def symbol(unit: str | None) -> str:
    """The short form shown beside a field ("µm", "e/Å²"); empty for a plain number."""
    if not unit:
        return ""
    return f"{ureg.Unit(unit):~P}"
