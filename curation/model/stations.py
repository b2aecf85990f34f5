"""Places, instruments and the stations (instrument PCs) that log sessions."""

from __future__ import annotations

from datetime import datetime
from enum import StrEnum

from sqlalchemy import Double, ForeignKey, String
from sqlalchemy.orm import Mapped, mapped_column, relationship

from curation.db import Base, utcnow


class LocationKind(StrEnum):
    STORE = "store"
    CLEANROOM = "cleanroom"
    GLOVEBOX = "glovebox"
    INSTRUMENT = "instrument"
    LAB = "lab"
    IN_TRANSIT = "in-transit"


class Location(Base):
    """A place an item can be: a store, a cleanroom, a glovebox, an instrument, in transit."""

    __tablename__ = "locations"

    id: Mapped[int] = mapped_column(primary_key=True)
    code: Mapped[str] = mapped_column(String(64), unique=True)
    name: Mapped[str] = mapped_column(String(200))
    kind: Mapped[str] = mapped_column(String(20))
    #: the laboratory (institution) the place belongs to
    laboratory: Mapped[str] = mapped_column(String(200), default="")
    #: ISO 14644-1 class of a cleanroom (1 to 9, in steps of 0.1)
    iso_class: Mapped[float | None] = mapped_column(Double)
    created_at: Mapped[datetime] = mapped_column(default=utcnow)

    def __repr__(self) -> str:
        return f"<Location {self.code} ({self.kind})>"


class Instrument(Base):
    """An instrument that runs one or more technique families."""

    __tablename__ = "instruments"

    id: Mapped[int] = mapped_column(primary_key=True)
    code: Mapped[str] = mapped_column(String(64), unique=True)
    name: Mapped[str] = mapped_column(String(200))
    #: technique families, space-separated (e.g. "sem eds ebsd fib")
    techniques: Mapped[str] = mapped_column(String(200), default="")
    location_id: Mapped[int] = mapped_column(ForeignKey("locations.id"), index=True)
    created_at: Mapped[datetime] = mapped_column(default=utcnow)

    location: Mapped[Location] = relationship()

    def __repr__(self) -> str:
        return f"<Instrument {self.code}>"


class Station(Base):
    """An instrument PC: bound to one instrument and the place it stands in."""

    __tablename__ = "stations"

    id: Mapped[int] = mapped_column(primary_key=True)
    code: Mapped[str] = mapped_column(String(64), unique=True)
    name: Mapped[str] = mapped_column(String(200))
    instrument_id: Mapped[int | None] = mapped_column(ForeignKey("instruments.id"), index=True)
    location_id: Mapped[int] = mapped_column(ForeignKey("locations.id"), index=True)
    created_at: Mapped[datetime] = mapped_column(default=utcnow)

    instrument: Mapped[Instrument | None] = relationship()
    location: Mapped[Location] = relationship()

    def __repr__(self) -> str:
        return f"<Station {self.code}>"


class ApiToken(Base):
    """A token an instrument-side script presents to post sessions for one station."""

    __tablename__ = "api_tokens"

    id: Mapped[int] = mapped_column(primary_key=True)
    station_id: Mapped[int] = mapped_column(ForeignKey("stations.id"), index=True)
    label: Mapped[str] = mapped_column(String(200), default="")
    #: hex SHA-256 of the token; the token itself is shown once and never stored
    token_sha256: Mapped[str] = mapped_column(String(64), unique=True)
    created_at: Mapped[datetime] = mapped_column(default=utcnow)
    revoked_at: Mapped[datetime | None]

    station: Mapped[Station] = relationship()

    def __repr__(self) -> str:
        return f"<ApiToken {self.id} for station {self.station_id}>"
