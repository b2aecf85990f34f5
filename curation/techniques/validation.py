"""Check and clean a technique's raw parameters: parse, convert, test ranges, list every problem."""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import dataclass
from dataclasses import field as dataclass_field
from functools import lru_cache

from curation.errors import InvalidInput
from curation.techniques.catalogue import get
from curation.techniques.spec import Field, Technique, Value
from curation.techniques.units import (
    UnitError,
    convert,
    parse_unit,
    same_kind,
    split_value,
    symbol,
    ureg,
)

#: what a form or a JSON body may hold; anything else is refused with the field named
Raw = object

_TRUE = {"true", "yes", "on", "1", "y"}
_FALSE = {"false", "no", "off", "0", "n"}
_PRODUCT = re.compile(r"^\s*(\d{1,7})\s*[x×*]\s*(\d{1,7})\s*$")
_MAX_TEXT = 500
# words for the dimensions our fields use, so a refusal reads "'30 nm' is a length"
_DIMENSION_WORDS = {
    "[length]": "a length", "[length] ** 2": "an area", "[length] ** 3": "a volume",
    "[time]": "a time", "[current]": "a current", "[temperature]": "a temperature",
    "[mass]": "a mass", "1 / [time]": "a frequency", "1 / [length] ** 2": "a count per area",
    "[mass] * [length] ** 2 / [time] ** 2": "an energy",
    "[mass] * [length] ** 2 / [time] ** 3 / [current]": "a voltage",
    "[mass] / [length] / [time] ** 2": "a pressure",
    "[current] * [time] / [length] ** 2": "a charge per area",
}


@dataclass(frozen=True)
class RangeWarning:
    """A value accepted but outside its field's typical range: the form asks to confirm."""

    field: str
    value: float | int
    #: the typical range in words, with its unit ("0.5–30 kV")
    typical: str
    #: the field's unit symbol, empty for counts
    unit: str = ""

    @property
    def message(self) -> str:
        """The sentence shown beside the field."""
        value = f"{self.value:g} {self.unit}".rstrip()
        return f"{self.field}: {value} is outside the typical range {self.typical}"


@dataclass(frozen=True)
class Validated:
    """Clean parameters (numbers in each field's unit, keyed by field name) and warnings."""

    technique: Technique = dataclass_field(repr=False)
    values: dict[str, Value] = dataclass_field(default_factory=dict)
    warnings: tuple[RangeWarning, ...] = ()

    @property
    def code(self) -> str:
        """The technique's code."""
        return self.technique.code


class ValidationFailed(InvalidInput):
    """Every problem of one submission at once, each an InvalidInput naming its field."""

    def __init__(self, technique: str, problems: list[InvalidInput]) -> None:
        self.technique = technique
        self.problems = tuple(problems)
        super().__init__(", ".join(p.field for p in problems),
                         {p.field: p.value for p in problems},
                         "; ".join(f"{p.field}: {p.allowed}" for p in problems))
        self.args = (f"{technique}: " + "; ".join(str(p) for p in problems),)

    @property
    def by_field(self) -> dict[str, list[str]]:
        """What to show beside each field."""
        shown: dict[str, list[str]] = {}
        for p in self.problems:
            shown.setdefault(p.field, []).append(p.allowed)
        return shown


def validate(technique_code: str, raw: Mapping[str, Raw]) -> Validated:
    """Clean raw parameters for a technique; ValidationFailed lists every problem found."""
    technique = get(technique_code)
    problems = [InvalidInput(name, raw[name], "not a field of " + technique.code + "; fields: "
                             + ", ".join(f.name for f in technique.fields))
                for name in raw if technique.field(name) is None]
    values: dict[str, Value] = {}
    for spec in technique.fields:
        if _is_blank(raw.get(spec.name)):
            continue
        try:
            values[spec.name] = clean(spec, raw[spec.name])
        except InvalidInput as problem:
            problems.append(problem)
    problems += _fill_missing(technique, raw, values)
    if problems:
        raise ValidationFailed(technique.code, problems)
    warnings = tuple(w for spec in technique.fields if (w := typical_warning(spec, values)))
    return Validated(technique, values, warnings)


def _fill_missing(technique: Technique, raw: Mapping[str, Raw],
                  values: dict[str, Value]) -> list[InvalidInput]:
    """Defaults for empty optional fields; a problem for each empty required one."""
    problems = []
    for spec in technique.fields:
        if spec.name in values or not _is_blank(raw.get(spec.name)):
            continue
        if spec.is_required(values):
            problems.append(InvalidInput(spec.name, None, "required" + _why_required(spec)))
        elif spec.default is not None:
            values[spec.name] = spec.default
    return problems


def _why_required(spec: Field) -> str:
    """' when pulse_mode is laser or laser_and_voltage' for a conditional requirement."""
    if spec.required or spec.required_when is None:
        return ""
    other, wanted = spec.required_when
    return f" when {other} is {' or '.join(wanted)}"


def clean(spec: Field, raw: Raw) -> Value:
    """One field's value parsed, converted to its unit and checked against its hard range."""
    if spec.kind == "choice":
        return _choice(spec, raw)
    if spec.kind == "text":
        return _text(spec, raw)
    if spec.kind == "bool":
        return _bool(spec, raw)
    value: float | int = _integer(spec, raw) if spec.kind == "integer" else _number(spec, raw)
    if value not in spec.hard:
        raise InvalidInput(spec.name, raw, "allowed range " + spec.hard.describe(spec.unit))
    return value


def typical_warning(spec: Field, values: Mapping[str, Value]) -> RangeWarning | None:
    """A warning when a cleaned number lies outside the field's typical range."""
    value = values.get(spec.name)
    if spec.typical is None or not isinstance(value, int | float) or isinstance(value, bool):
        return None
    if value in spec.typical:
        return None
    return RangeWarning(spec.name, value, spec.typical.describe(spec.unit), symbol(spec.unit))


def _is_blank(raw: Raw) -> bool:
    """None or an empty string: the field was left empty."""
    return raw is None or (isinstance(raw, str) and not raw.strip())


def _expected(spec: Field) -> str:
    """What a number field takes, in words (only written when a value is refused)."""
    return f"a number in {symbol(spec.unit)}" if spec.unit else "a plain number"


def _number(spec: Field, raw: Raw) -> float:
    """A float in the field's unit, from a number or text with an optional unit."""
    if isinstance(raw, bool) or not isinstance(raw, int | float | str):
        raise InvalidInput(spec.name, raw, _expected(spec))
    if not isinstance(raw, str):
        if not math.isfinite(raw):
            raise InvalidInput(spec.name, raw, _expected(spec))
        return float(raw)
    try:
        number, unit = split_value(raw)
    except UnitError as exc:
        raise InvalidInput(spec.name, raw, f"{_expected(spec)}, e.g. '12' or "
                           f"'12 {symbol(spec.unit)}' ({exc})") from exc
    if unit is None:
        return number
    return _converted(spec, raw, number, unit)


def _converted(spec: Field, raw: str, number: float, unit: object) -> float:
    """The number converted from the unit typed to the field's unit, refusing a wrong kind."""
    if spec.unit is None:
        raise InvalidInput(spec.name, raw, "a plain number without a unit")
    target = parse_unit(spec.unit)
    if not same_kind(unit, target):  # type: ignore[arg-type]
        raise InvalidInput(spec.name, raw, f"a value in {symbol(spec.unit)} "
                           f"({_kind(target)}); {raw.strip()!r} is {_kind(unit)}")
    value = convert(number, unit, target)  # type: ignore[arg-type]
    if not math.isfinite(value):
        raise InvalidInput(spec.name, raw, f"a finite number in {symbol(spec.unit)}")
    # conversion leaves binary noise (500 pA → 0.4999999999999999 nA) that would show on pages
    # and in exports; 12 significant figures is beyond any instrument's precision
    return float(f"{value:.12g}")


def _kind(unit: object) -> str:
    """'a length', 'a voltage', ... for a unit, or its dimension when we have no word for it."""
    dimensionality = ureg.Unit(unit).dimensionality  # type: ignore[arg-type]
    if not dimensionality:
        name = str(ureg.get_root_units(unit)[1])  # type: ignore[arg-type]
        return "an angle" if name == "radian" else "a plain ratio"
    text = str(dimensionality)
    return _DIMENSION_WORDS.get(text, f"of dimension {text}")


def _integer(spec: Field, raw: Raw) -> int:
    """A whole number, also written '2.4e7'; '1024 x 768' is the product (pixels of a frame)."""
    if isinstance(raw, str):
        product = _PRODUCT.match(raw)
        if product:
            return int(product.group(1)) * int(product.group(2))
        try:
            raw = float(raw.strip())
        except ValueError:
            raise InvalidInput(spec.name, raw, "a whole number") from None
    if isinstance(raw, bool) or not isinstance(raw, int | float):
        raise InvalidInput(spec.name, raw, "a whole number")
    if isinstance(raw, float) and not (math.isfinite(raw) and raw.is_integer()):
        raise InvalidInput(spec.name, raw, "a whole number")
    return int(raw)


def _normal(word: str) -> str:
    """Choices compare case-blind, with spaces and hyphens read as underscores."""
    return re.sub(r"[\s\-]+", "_", word.strip().lower())


@lru_cache(maxsize=256)
def _by_normal(choices: tuple[str, ...]) -> dict[str, str]:
    """Each choice by its normal form (worked out once per set of choices)."""
    return {_normal(c): c for c in choices}


def _choice(spec: Field, raw: Raw) -> str:
    """The canonical spelling of one of the field's choices."""
    by_normal = _by_normal(spec.choices)
    if isinstance(raw, str) and (word := _normal(raw)) in by_normal:
        return by_normal[word]
    raise InvalidInput(spec.name, raw, "one of " + ", ".join(spec.choices))


def _text(spec: Field, raw: Raw) -> str:
    """Stripped text of bounded length."""
    text = str(raw).strip()
    if len(text) > _MAX_TEXT:
        raise InvalidInput(spec.name, raw[:40] + "…" if isinstance(raw, str) else raw,
                           f"at most {_MAX_TEXT} characters")
    return text


def _bool(spec: Field, raw: Raw) -> bool:
    """A flag from a checkbox, JSON or the words yes/no."""
    if isinstance(raw, bool):
        return raw
    word = str(raw).strip().lower()
    if word in _TRUE or word in _FALSE:
        return word in _TRUE
    raise InvalidInput(spec.name, raw, "yes or no")
