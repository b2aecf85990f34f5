"""Writes about places, instruments and stations."""

from __future__ import annotations

from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import ledger
from curation.errors import InvalidInput, RuleViolation
from curation.model import Instrument, Location, LocationKind, Person, Station
from curation.services.common import one_of


def _unique(session: Session, model: type, code: str, what: str) -> None:
    if not code or not code.strip():
        raise InvalidInput("code", code, f"a non-empty {what} code")
    if session.scalar(select(model.id).where(model.code == code)) is not None:  # type: ignore[attr-defined]
        raise RuleViolation(f"{what} code {code!r} is already in use")


def add_location(
    session: Session, *, actor: Person | str, code: str, name: str, kind: str,
    laboratory: str = "", iso_class: float | None = None,
) -> Location:
    """Register a place: store, cleanroom (with its ISO class), glovebox, instrument, lab."""
    ledger.attribute(session, actor)
    one_of("kind", kind, [k.value for k in LocationKind])
    _unique(session, Location, code, "location")
    if iso_class is not None and not 1 <= iso_class <= 9:
        raise InvalidInput("iso_class", iso_class, "ISO 14644-1 class from 1 to 9")
    location = Location(code=code, name=name, kind=kind, laboratory=laboratory, iso_class=iso_class)
    session.add(location)
    session.flush()
    return location


def add_instrument(
    session: Session, *, actor: Person | str, code: str, name: str, location: Location,
    techniques: str = "",
) -> Instrument:
    """Register an instrument standing at a location."""
    ledger.attribute(session, actor)
    _unique(session, Instrument, code, "instrument")
    instrument = Instrument(code=code, name=name, location=location, techniques=techniques)
    session.add(instrument)
    session.flush()
    return instrument


def add_station(
    session: Session, *, actor: Person | str, code: str, name: str,
    instrument: Instrument | None, location: Location,
) -> Station:
    """Register an instrument PC bound to one instrument and location."""
    ledger.attribute(session, actor)
    _unique(session, Station, code, "station")
    station = Station(code=code, name=name, instrument=instrument, location=location)
    session.add(station)
    session.flush()
    return station
