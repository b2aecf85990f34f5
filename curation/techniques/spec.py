"""The declarative shape of a technique: its fields, units and ranges, what it does to a sample."""

from __future__ import annotations

from dataclasses import dataclass
from dataclasses import field as dataclass_field
from typing import Literal

from curation.techniques.units import symbol

FieldKind = Literal["number", "integer", "choice", "text", "bool"]
Value = float | int | str | bool


def _fmt(x: float) -> str:
    """A bound as people write it: 30, 0.5, 1e+16."""
    return f"{x:g}"


@dataclass(frozen=True)
class Range:
    """A closed interval (open below when low_open) in a field's unit; None is unbounded."""

    low: float | None = None
    high: float | None = None
    #: True when the low bound itself is refused (a current or an area must be above zero)
    low_open: bool = False

    def __contains__(self, x: float) -> bool:
        if self.low is not None and (x <= self.low if self.low_open else x < self.low):
            return False
        return self.high is None or x <= self.high

    def describe(self, unit: str | None) -> str:
        """The interval in words with its unit: "0.5–30 kV", "above 0 nA", "at most 90 deg"."""
        sym = f" {symbol(unit)}" if unit else ""
        if self.low is not None and self.high is not None:
            low = f"above {_fmt(self.low)} and up to " if self.low_open else f"{_fmt(self.low)}–"
            return f"{low}{_fmt(self.high)}{sym}"
        if self.low is not None:
            return f"{'above' if self.low_open else 'at least'} {_fmt(self.low)}{sym}"
        if self.high is not None:
            return f"at most {_fmt(self.high)}{sym}"
        return "any value"


POSITIVE = Range(0, None, low_open=True)


@dataclass(frozen=True)
class Field:
    """One parameter of a technique, named NeXus-style with its unit in the key."""

    name: str
    label: str
    kind: FieldKind = "number"
    #: pint unit string the value is stored in; None for counts, choices, text and flags
    unit: str | None = None
    #: values outside are refused: physics or instrument-class limits
    hard: Range = Range()
    #: values outside are accepted with a warning; None when there is no usual range
    typical: Range | None = None
    required: bool = False
    #: required only when another field has one of these values: (field, values)
    required_when: tuple[str, tuple[str, ...]] | None = None
    choices: tuple[str, ...] = ()
    #: used when the field is left empty
    default: Value | None = None
    help: str = ""

    @property
    def unit_symbol(self) -> str:
        """The unit as shown beside the input."""
        return symbol(self.unit)

    def is_required(self, values: dict[str, Value]) -> bool:
        """Whether this field must be filled, given the other (already cleaned) values."""
        if self.required:
            return True
        if self.required_when is None:
            return False
        other, wanted = self.required_when
        return values.get(other) in wanted


Beam = Literal["electron", "ion"]


@dataclass(frozen=True)
class Technique:
    """One kind of instrument session or preparation step, and what it does to the sample."""

    code: str
    family: str
    label: str
    fields: tuple[Field, ...]
    is_destructive: bool = False
    puts_electron_beam: bool = False
    puts_ion_beam: bool = False
    puts_xrays: bool = False
    #: kinds of child item the step may create ("lamella", "needle", ...); empty when none
    creates: tuple[str, ...] = ()
    help: str = ""
    _by_name: dict[str, Field] = dataclass_field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        names = [f.name for f in self.fields]
        duplicates = sorted({n for n in names if names.count(n) > 1})
        if duplicates:
            raise ValueError(f"{self.code}: duplicate fields {duplicates}")
        object.__setattr__(self, "_by_name", {f.name: f for f in self.fields})

    def field(self, name: str) -> Field | None:
        """The field with this name, or None."""
        return self._by_name.get(name)

    @property
    def creates_items(self) -> bool:
        """True when a session of this technique can make new child items."""
        return bool(self.creates)

    @property
    def puts_beam(self) -> bool:
        """True when the technique puts electrons, ions or X-rays on the sample."""
        return self.puts_electron_beam or self.puts_ion_beam or self.puts_xrays
