"""Environment readings at a location: particle counts, glovebox atmosphere, storage climate."""

from __future__ import annotations

from datetime import datetime
from enum import StrEnum
from typing import Any

from sqlalchemy import Double, ForeignKey, Index, String
from sqlalchemy.orm import Mapped, mapped_column, relationship

from curation.db import Base, utcnow
from curation.model.accounts import Person
from curation.model.stations import Location


class ReadingKind(StrEnum):
    PARTICLE_COUNT = "particle-count"
    ATMOSPHERE = "atmosphere"
    CLIMATE = "climate"


class EnvironmentReading(Base):
    """One reading of a room, glovebox or store at an instant."""

    __tablename__ = "environment_readings"
    __table_args__ = (Index("ix_environment_readings_location_time", "location_id", "measured_at"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    location_id: Mapped[int] = mapped_column(ForeignKey("locations.id"))
    kind: Mapped[str] = mapped_column(String(20))
    measured_at: Mapped[datetime]
    recorded_at: Mapped[datetime] = mapped_column(default=utcnow)
    actor_id: Mapped[int] = mapped_column(ForeignKey("people.id"))
    #: glovebox oxygen, ppm by volume
    o2_ppm: Mapped[float | None] = mapped_column(Double)
    #: glovebox moisture, ppm by volume
    h2o_ppm: Mapped[float | None] = mapped_column(Double)
    #: degrees Celsius
    temperature_C: Mapped[float | None] = mapped_column(Double)
    #: relative humidity, percent
    humidity_pct: Mapped[float | None] = mapped_column(Double)
    #: ISO 14644-1 class computed from the counts
    iso_class: Mapped[float | None] = mapped_column(Double)
    #: particle counts: {"0.5": particles per m3 at >= 0.5 um, ...}; source file, instrument
    details: Mapped[dict[str, Any]] = mapped_column(default=dict)

    location: Mapped[Location] = relationship()
    actor: Mapped[Person] = relationship()

    def __repr__(self) -> str:
        return f"<EnvironmentReading {self.kind} at {self.location_id} {self.measured_at}>"
