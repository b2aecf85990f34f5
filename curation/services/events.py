"""Writes of events on the timeline, and corrections that supersede them."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import ledger, techniques
from curation.errors import InvalidInput, RuleViolation
from curation.model import Event, EventKind, Item, Location, Person, Station
from curation.services.common import aware, one_of

#: the dose columns of a beam step (computed at recording, or as the instrument reported)
DOSE_FIELDS = ("electron_dose_e_per_A2", "dose_rate_e_per_A2_s", "ion_fluence_ions_per_cm2",
               "xray_s", "is_dose_reported")

#: fields a correction may change
CORRECTABLE = (
    "occurred_at", "ended_at", "location", "station", "counterparty", "technique", "action",
    "environment", "is_destructive", "summary", "details", "note", *DOSE_FIELDS,
)


def record_event(
    session: Session, *, actor: Person, kind: str, item: Item, occurred_at: datetime,
    ended_at: datetime | None = None, station: Station | None = None,
    location: Location | None = None, counterparty: Person | None = None,
    technique: str | None = None, action: str | None = None, environment: str | None = None,
    is_destructive: bool = False, summary: str = "", details: dict[str, Any] | None = None,
    note: str = "", supersedes: Event | None = None, submission_key: str | None = None,
    dose: dict[str, Any] | None = None,
) -> Event:
    """Append an event to an item's timeline; `actor` is who did it.

    `dose` holds the DOSE_FIELDS of a beam step; `submission_key` groups the events of one
    form submission (the database refuses a second event per item with the same key).
    """
    ledger.attribute(session, actor)
    one_of("kind", kind, [k.value for k in EventKind])
    aware("occurred_at", occurred_at)
    aware("ended_at", ended_at)
    if ended_at is not None and ended_at < occurred_at:
        raise InvalidInput("ended_at", ended_at.isoformat(),
                           f"at or after occurred_at {occurred_at.isoformat()}")
    if location is None and station is not None:
        location = station.location
    unknown = sorted(set(dose or {}) - set(DOSE_FIELDS))
    if unknown:
        raise InvalidInput("dose", unknown, "only " + ", ".join(DOSE_FIELDS))
    event = Event(
        kind=kind, item=item, occurred_at=occurred_at, ended_at=ended_at, actor=actor,
        station=station, location=location, counterparty=counterparty, technique=technique,
        action=action, environment=environment, is_destructive=is_destructive,
        summary=summary, details=dict(details or {}), note=note,
        supersedes_id=supersedes.id if supersedes is not None else None,
        submission_key=submission_key, **(dose or {}),
    )
    session.add(event)
    session.flush()
    return event


def step_dose(technique: str | None, details: dict[str, Any],
              recorded: dict[str, Any]) -> dict[str, Any]:
    """The dose columns for corrected parameters: recomputed where the catalogue knows the
    technique, so a correction of current, time or area never leaves the old dose behind."""
    known = technique is not None and technique.strip().lower() in techniques.TECHNIQUES
    if not known or recorded.get("is_dose_reported"):
        return recorded
    dose = techniques.dose_for(technique, details)  # type: ignore[arg-type]
    return dose_columns(dose) or {name: None for name in DOSE_FIELDS[:-1]} | {
        "is_dose_reported": False}


def dose_columns(dose: techniques.Dose | None) -> dict[str, Any]:
    """A computed or reported dose as the event's dose columns (empty for no beam)."""
    if dose is None:
        return {}
    return {"electron_dose_e_per_A2": dose.electron_dose_e_per_A2,
            "dose_rate_e_per_A2_s": dose.dose_rate_e_per_A2_s,
            "ion_fluence_ions_per_cm2": dose.ion_fluence_ions_per_cm2,
            "xray_s": dose.xray_seconds, "is_dose_reported": dose.is_reported}


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
    dose = {name: fields.pop(name) for name in DOSE_FIELDS}
    if "details" in changes and not set(DOSE_FIELDS) & set(changes):
        dose = step_dose(fields.get("technique"), fields["details"], dose)
    return record_event(
        session, actor=actor, kind=original.kind, item=original.item, supersedes=original,
        dose=dose, **fields,
    )
