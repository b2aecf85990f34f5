"""The exposure and dose budget of one item over its effective history (pure computation).

Reads the resolver's entries (own, container and ancestor events up to the cut); nothing here
queries the database. A step's dose is the one stored on the event (the station writes it)
or, for steps logged before doses were stored, `techniques.dose_for` over its parameters:
one definition of dose either way. Doses add up as if every exposed field overlapped the
item, so the totals are upper bounds.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from curation.errors import CurationError
from curation.history import HistoryEntry
from curation.model import Event
from curation.techniques import Dose, dose_for
from curation.techniques.densities import material_class

#: default per-acquisition electron dose limits by material class, e-/Å²; soft (warnings).
#: hydrous: ~100 e-/Å² per acquisition (REFERENCES.md, common practice, from memory);
#: anhydrous: ten times that, since hydrated silicates are roughly ten times more
#: dose-sensitive than dehydrated ones (Vance et al. 1986, Radiation Effects 98; from memory);
#: organic: treated like hydrous (no source)
DEFAULT_ACQUISITION_LIMITS = {"hydrous": 100.0, "organic": 100.0, "anhydrous": 1000.0}


def event_dose(ev: Event) -> Dose | None:
    """The dose a step delivered: the stored columns, else computed from its parameters."""
    stored = (ev.electron_dose_e_per_A2, ev.ion_fluence_ions_per_cm2, ev.xray_s)
    if any(v is not None for v in stored):
        return Dose(electron_dose_e_per_A2=ev.electron_dose_e_per_A2,
                    dose_rate_e_per_A2_s=ev.dose_rate_e_per_A2_s,
                    ion_fluence_ions_per_cm2=ev.ion_fluence_ions_per_cm2,
                    xray_seconds=ev.xray_s, is_reported=ev.is_dose_reported)
    if ev.kind != "step" or not ev.technique:
        return None
    try:
        return dose_for(ev.technique, ev.details or {})
    except (CurationError, ValueError, TypeError):
        return None  # an unknown technique or unreadable parameters: no dose known


@dataclass(frozen=True)
class Point:
    """Cumulative totals just after an event, for the plot."""

    at: datetime
    electron_e_per_A2: float
    air_minutes: float
    event_id: int


@dataclass
class Budget:
    """What reached the item: air, electrons by technique, ions, X-rays, heat, with evidence."""

    air_minutes: float = 0.0
    air_events: list[Event] = field(default_factory=list)
    electron_by_technique: dict[str, float] = field(default_factory=dict)
    electron_events: list[tuple[Event, float]] = field(default_factory=list)
    ion_fluence_ions_per_cm2: float = 0.0
    ion_events: list[tuple[Event, float]] = field(default_factory=list)
    xray_s: float = 0.0
    xray_events: list[tuple[Event, float]] = field(default_factory=list)
    max_temperature_K: float | None = None
    heating_events: list[tuple[Event, float]] = field(default_factory=list)
    series: list[Point] = field(default_factory=list)

    @property
    def electron_e_per_A2(self) -> float:
        """Total electron dose, e-/Å²."""
        return sum(self.electron_by_technique.values())

    def as_dict(self) -> dict[str, Any]:
        """Plain values for JSON and CSV."""
        return {
            "air_minutes": self.air_minutes,
            "electron_dose_e_per_A2": self.electron_e_per_A2,
            "electron_dose_by_technique": dict(self.electron_by_technique),
            "ion_fluence_ions_per_cm2": self.ion_fluence_ions_per_cm2,
            "xray_s": self.xray_s,
            "max_temperature_K": self.max_temperature_K,
        }


def merged_minutes(intervals: list[tuple[datetime, datetime]]) -> float:
    """Minutes covered by the union of intervals: overlapping exposures count once."""
    total, end = 0.0, None
    for start, stop in sorted(intervals):
        if end is not None and start < end:
            start = end
        if stop > start:
            total += (stop - start).total_seconds() / 60
        end = stop if end is None or stop > end else end
    return total


def is_air(ev: Event) -> bool:
    """A handling event in room air."""
    return ev.kind == "handling" and ev.environment == "air"


def heating_K(ev: Event) -> float | None:
    """The temperature a heating step reached, kelvin."""
    if ev.kind != "step" or ev.technique != "heating":
        return None
    value = (ev.details or {}).get("temperature_K")
    return float(value) if isinstance(value, int | float) else None


def budget(entries: list[HistoryEntry],
           dose: Callable[[Event], Dose | None] = event_dose) -> Budget:
    """Add up the item's effective history (corrections already applied), oldest first;
    `dose`: `event_dose`, or a memo of it."""
    out = Budget()
    air: list[tuple[datetime, datetime]] = []
    for entry in entries:
        ev = entry.event
        if is_air(ev):
            air.append((ev.occurred_at, ev.ended_at or ev.occurred_at))
            out.air_events.append(ev)
            out.air_minutes = merged_minutes(air)
        _add_dose(out, ev, dose(ev))
        temperature = heating_K(ev)
        if temperature is not None:
            out.heating_events.append((ev, temperature))
            out.max_temperature_K = max(out.max_temperature_K or temperature, temperature)
        if is_air(ev) or out.electron_events and out.electron_events[-1][0] is ev:
            out.series.append(Point(ev.ended_at or ev.occurred_at, out.electron_e_per_A2,
                                    out.air_minutes, ev.id))
    return out


def _add_dose(out: Budget, ev: Event, dose: Dose | None) -> None:
    if dose is None:
        return
    if dose.electron_dose_e_per_A2:
        name = ev.technique or "unknown"
        out.electron_by_technique[name] = (out.electron_by_technique.get(name, 0.0)
                                           + dose.electron_dose_e_per_A2)
        out.electron_events.append((ev, dose.electron_dose_e_per_A2))
    if dose.ion_fluence_ions_per_cm2:
        out.ion_fluence_ions_per_cm2 += dose.ion_fluence_ions_per_cm2
        out.ion_events.append((ev, dose.ion_fluence_ions_per_cm2))
    if dose.xray_seconds:
        out.xray_s += dose.xray_seconds
        out.xray_events.append((ev, dose.xray_seconds))


def acquisition_limit(material: str, study_limit: float | None) -> tuple[float, bool]:
    """The per-acquisition electron dose limit and whether the study set it (else a default)."""
    if study_limit is not None:
        return float(study_limit), True
    return DEFAULT_ACQUISITION_LIMITS[material_class(material)], False
