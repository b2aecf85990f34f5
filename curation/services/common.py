"""Checks shared by every area's writes."""

from __future__ import annotations

import csv
import io
from collections.abc import Callable, Iterable, Mapping, Sequence
from datetime import datetime
from typing import Any, TypeVar

from sqlalchemy import select
from sqlalchemy.orm import Session

from curation.errors import ImportRejected, InvalidInput, NaiveTimestamp, NotFound
from curation.model import Item, Location, Person, Station, Study

T = TypeVar("T")


def aware(field: str, value: datetime | None) -> datetime | None:
    """Refuse a naive timestamp, naming the field."""
    if value is not None and (value.tzinfo is None or value.utcoffset() is None):
        raise NaiveTimestamp(field, value.isoformat())
    return value


def one_of(field: str, value: T, allowed: Iterable[T]) -> T:
    """Refuse a value outside a fixed set, naming the field and the choices."""
    choices = allowed if isinstance(allowed, tuple | list | frozenset) else list(allowed)
    if value not in choices:
        raise InvalidInput(field, value, "one of " + ", ".join(str(c) for c in choices))
    return value


def not_negative(field: str, value: float | None) -> float | None:
    """Refuse a negative quantity (a mass, a volume, an uncertainty)."""
    if value is not None and not value >= 0:
        raise InvalidInput(field, value, "zero or more")
    return value


def parse_csv(text: str, columns: Sequence[str],
              parse_row: Callable[[int, Mapping[str, str]], T | str]) -> list[T]:
    """Every data row parsed by `parse_row(line, row)` (which returns a problem as text), or
    ImportRejected naming every bad row with its line: an import is all or nothing."""
    reader = csv.DictReader(io.StringIO(text))
    missing = [c for c in columns if c not in (reader.fieldnames or [])]
    if missing:
        raise ImportRejected([f"line 1: missing column(s) {', '.join(missing)}"])
    parsed: list[T] = []
    problems: list[str] = []
    for line, row in enumerate(reader, start=2):
        result = parse_row(line, row)
        if isinstance(result, str):
            problems.append(result)
        else:
            parsed.append(result)
    if problems or not parsed:
        raise ImportRejected(problems or ["the file has no data rows"])
    return parsed


def _one(session: Session, model: type[T], column: Any, value: str, what: str) -> T:
    """The row whose unique `column` equals `value`, or NotFound naming it."""
    found = session.scalar(select(model).where(column == value))
    if found is None:
        raise NotFound(f"no {what} {value!r}")
    return found


def item_by_code(session: Session, code: str) -> Item:
    """The item with this label code, or NotFound naming the code."""
    return _one(session, Item, Item.code, code, "item with code")


def person_by_username(session: Session, username: str) -> Person:
    """The person with this username, or NotFound naming it."""
    return _one(session, Person, Person.username, username, "person with username")


def location_by_code(session: Session, code: str) -> Location:
    """The location with this code, or NotFound naming it."""
    return _one(session, Location, Location.code, code, "location with code")


def study_by_code(session: Session, code: str) -> Study:
    """The study with this code, or NotFound naming it."""
    return _one(session, Study, Study.code, code, "study with code")


def station_by_code(session: Session, code: str) -> Station:
    """The station with this code, or NotFound naming it."""
    return _one(session, Station, Station.code, code, "station with code")
