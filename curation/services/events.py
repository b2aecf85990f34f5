"""Writes of events on the timeline, and corrections that supersede them."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import ledger
from curation.errors import InvalidInput, RuleViolation
from curation.model import Event, EventKind, Item, Location, Person, Station
from curation.services.common import aware, one_of

#: fields a correction may change
CORRECTABLE = (
    "occurred_at", "ended_at", "location", "station", "counterparty", "technique", "action",
    "environment", "is_destructive", "summary", "details", "note",
)


def record_event(
    session: Session, *, actor: Person, kind: str, item: Item, occurred_at: datetime,
    ended_at: datetime | None = None, station: Station | None = None,
    location: Location | None = None, counterparty: Person | None = None,
    technique: str | None = None, action: str | None = None, environment: str | None = None,
    is_destructive: bool = False, summary: str = "", details: dict[str, Any] | None = None,
    note: str = "", supersedes: Event | None = None,
) -> Event:
    """Append an event to an item's timeline; `actor` is who did it."""
    ledger.attribute(session, actor)
    one_of("kind", kind, [k.value for k in EventKind])
    aware("occurred_at", occurred_at)
    aware("ended_at", ended_at)
    if ended_at is not None and ended_at < occurred_at:
        raise InvalidInput("ended_at", ended_at.isoformat(),
                           f"at or after occurred_at {occurred_at.isoformat()}")
    if location is None and station is not None:
        location = station.location
    event = Event(
        kind=kind, item=item, occurred_at=occurred_at, ended_at=ended_at, actor=actor,
        station=station, location=location, counterparty=counterparty, technique=technique,
        action=action, environment=environment, is_destructive=is_destructive,
        summary=summary, details=dict(details or {}), note=note,
        supersedes_id=supersedes.id if supersedes is not None else None,
    )
    session.add(event)
    session.flush()
    return event


def superseded_by(session: Session, event: Event) -> Event | None:
    """The correction that supersedes this event, if any."""
    return session.scalars(select(Event).where(Event.supersedes_id == event.id)).first()


def correct_event(
    session: Session, *, actor: Person, original: Event, reason: str, **changes: Any
) -> Event:
    """Record a correction: a new event that supersedes `original`; both stay visible."""
    unknown = sorted(set(changes) - set(CORRECTABLE))
    if unknown:
        raise InvalidInput("changes", unknown, "one of " + ", ".join(CORRECTABLE))
    if not reason.strip():
        raise InvalidInput("reason", reason, "a non-empty reason for the correction")
    later = superseded_by(session, original)
    if later is not None:
        raise RuleViolation(
            f"event {original.id} was already corrected by event {later.id}; correct that one")
    fields = {name: getattr(original, name) for name in CORRECTABLE}
    fields.update(changes)
    tag = f"[correction of event {original.id}: {reason}]"
    fields["note"] = f"{fields['note']}\n{tag}" if fields.get("note") else tag
    return record_event(
        session, actor=actor, kind=original.kind, item=original.item, supersedes=original,
        **{k: v for k, v in fields.items()},
    )
