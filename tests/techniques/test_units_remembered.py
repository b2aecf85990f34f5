"""Unit answers are remembered between rows; remembering must not change any answer.

The reference is pint itself, asked directly with no memory in between.
"""

from __future__ import annotations

import math
import random

import pytest

from curation.techniques import units
from curation.techniques.units import UnitError, convert, parse_unit, ureg


def test_conversions_repeat_pint_exactly() -> None:
    rng = random.Random(14)
    pairs = [("nA", "pA"), ("pA", "nA"), ("V", "kV"), ("degC", "K"), ("nm**2", "um**2"),
             ("C/cm**2", "e/angstrom**2")]
    for source, target in pairs:
        for _ in range(50):
            value = rng.choice([rng.uniform(-1e3, 1e3), rng.uniform(0, 1e-6), 1.0, 0.5])
            expected = float(ureg.Quantity(value, source).to(target).magnitude)
            for _ in range(2):  # the second answer comes from memory
                assert convert(value, parse_unit(source), parse_unit(target)) == expected


def test_zero_keeps_its_sign_after_the_other_zero() -> None:
    nano, pico = parse_unit("nA"), parse_unit("pA")
    assert math.copysign(1, convert(-0.0, nano, pico)) == -1
    assert math.copysign(1, convert(0.0, nano, pico)) == 1
    assert math.copysign(1, convert(-0.0, nano, pico)) == -1


@pytest.mark.parametrize("text", ["m**(10**10**10)", "xyzzy", "m" * 50])
def test_refused_units_are_refused_every_time(text: str) -> None:
    for _ in range(2):
        with pytest.raises(UnitError):
            parse_unit(text)


def test_same_kind_and_symbols_answer_as_pint_does() -> None:
    assert units.same_kind(parse_unit("nA"), parse_unit("A"))
    assert not units.same_kind(parse_unit("degree"), parse_unit("percent"))
    assert units.symbol("um**2") == f"{ureg.Unit('um**2'):~P}" == units.symbol("um**2")
