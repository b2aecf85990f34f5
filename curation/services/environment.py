"""Environment readings: particle counts (classified per ISO 14644-1), glovebox atmosphere
(entered or imported from CSV, all or nothing), storage climate."""

from __future__ import annotations

from collections.abc import Mapping
from datetime import datetime
from typing import Any

from sqlalchemy.orm import Session

from curation import environment, ledger
from curation.errors import InvalidInput
from curation.model import EnvironmentReading, Location, Person, ReadingKind
from curation.services.common import aware, parse_csv


def _reading(session: Session, *, actor: Person, location: Location, kind: ReadingKind,
             measured_at: datetime, **fields: Any) -> EnvironmentReading:
    ledger.attribute(session, actor)
    aware("measured_at", measured_at)
    reading = EnvironmentReading(location_id=location.id, kind=kind.value,
                                 measured_at=measured_at, actor_id=actor.id, **fields)
    session.add(reading)
    session.flush()
    return reading


def record_particle_counts(session: Session, *, actor: Person, location: Location,
                           measured_at: datetime, counts_per_m3: Mapping[float, float],
                           counter: str = "") -> EnvironmentReading:
    """Cumulative particle concentrations per size channel, with the ISO class they meet."""
    result = environment.classify(counts_per_m3)
    counts = {f"{size:g}": float(count) for size, count in sorted(counts_per_m3.items())}
    return _reading(session, actor=actor, location=location, kind=ReadingKind.PARTICLE_COUNT,
                    measured_at=measured_at, iso_class=result.iso_class,
                    details={"counts_per_m3": counts, "counter": counter,
                             "deciding_size_um": result.deciding_size_um})


def record_atmosphere(session: Session, *, actor: Person, location: Location,
                      measured_at: datetime, o2_ppm: float, h2o_ppm: float,
                      source: str = "") -> EnvironmentReading:
    """A glovebox O2/H2O reading in ppm."""
    for name, value in (("o2_ppm", o2_ppm), ("h2o_ppm", h2o_ppm)):
        if not 0 <= value <= 1_000_000:
            raise InvalidInput(name, value, "0 to 1 000 000 ppm")
    return _reading(session, actor=actor, location=location, kind=ReadingKind.ATMOSPHERE,
                    measured_at=measured_at, o2_ppm=o2_ppm, h2o_ppm=h2o_ppm,
                    details={"source": source} if source else {})


def record_climate(session: Session, *, actor: Person, location: Location,
                   measured_at: datetime, temperature_C: float, humidity_pct: float) -> EnvironmentReading:
    """A store's temperature (°C) and relative humidity (%)."""
    if not -200 <= temperature_C <= 200:
        raise InvalidInput("temperature_C", temperature_C, "-200 to 200 °C")
    if not 0 <= humidity_pct <= 100:
        raise InvalidInput("humidity_pct", humidity_pct, "0 to 100 %")
    return _reading(session, actor=actor, location=location, kind=ReadingKind.CLIMATE,
                    measured_at=measured_at, temperature_C=temperature_C,
                    humidity_pct=humidity_pct)


ATMOSPHERE_COLUMNS = ("measured_at", "o2_ppm", "h2o_ppm")


def _parse_row(line: int, row: Mapping[str, str]) -> tuple[datetime, float, float] | str:
    try:
        at = datetime.fromisoformat(row["measured_at"].strip())
    except (ValueError, AttributeError):
        return f"line {line}: measured_at {row.get('measured_at')!r} is not an ISO 8601 timestamp"
    if at.tzinfo is None:
        return f"line {line}: measured_at {row['measured_at']!r} has no timezone offset"
    values = []
    for name in ("o2_ppm", "h2o_ppm"):
        try:
            value = float(row[name])
        except (TypeError, ValueError):
            return f"line {line}: {name} {row.get(name)!r} is not a number"
        if not 0 <= value <= 1_000_000:
            return f"line {line}: {name} {value:g} is outside 0 to 1 000 000 ppm"
        values.append(value)
    return at, values[0], values[1]


def import_atmosphere_csv(session: Session, *, actor: Person, location: Location,
                          text: str, source: str = "") -> list[EnvironmentReading]:
    """Import a glovebox log (columns measured_at, o2_ppm, h2o_ppm): every row or none."""
    parsed = parse_csv(text, ATMOSPHERE_COLUMNS, _parse_row)
    return [record_atmosphere(session, actor=actor, location=location, measured_at=at,
                              o2_ppm=o2, h2o_ppm=h2o, source=source) for at, o2, h2o in parsed]
