"""Events on items: steps, custody, handling and readings, on one timeline."""

from __future__ import annotations

from datetime import datetime
from enum import StrEnum
from typing import Any

from sqlalchemy import Double, ForeignKey, Index, String, Text, UniqueConstraint
from sqlalchemy.orm import Mapped, mapped_column, relationship

from curation.db import Base, utcnow
from curation.model.accounts import Person
from curation.model.items import Item
from curation.model.stations import Location, Station


class EventKind(StrEnum):
    STEP = "step"
    CUSTODY = "custody"
    HANDLING = "handling"
    READING = "reading"


class Event(Base):
    """Something that happened to an item at an instant (or over an interval)."""

    __tablename__ = "events"
    __table_args__ = (
        Index("ix_events_item_time", "item_id", "occurred_at"),
        UniqueConstraint("submission_key", "item_id"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    kind: Mapped[str] = mapped_column(String(16))
    item_id: Mapped[int] = mapped_column(ForeignKey("items.id"))
    #: instrument or station clock, timezone-aware
    occurred_at: Mapped[datetime]
    #: end of a session or an exposure; None for an instant
    ended_at: Mapped[datetime | None]
    #: server clock when the event was written
    recorded_at: Mapped[datetime] = mapped_column(default=utcnow)
    actor_id: Mapped[int] = mapped_column(ForeignKey("people.id"), index=True)
    station_id: Mapped[int | None] = mapped_column(ForeignKey("stations.id"), index=True)
    location_id: Mapped[int | None] = mapped_column(ForeignKey("locations.id"), index=True)
    #: the other person in a custody event (the intended recipient of a release, ...)
    counterparty_id: Mapped[int | None] = mapped_column(ForeignKey("people.id"))
    #: a correction names the event it supersedes; both stay visible
    supersedes_id: Mapped[int | None] = mapped_column(ForeignKey("events.id"), index=True)
    #: step: technique (e.g. "sem-imaging", "fib-liftout")
    technique: Mapped[str | None] = mapped_column(String(64))
    #: custody: action (release, receipt, store, seal-applied, ...); reading: indicator
    action: Mapped[str | None] = mapped_column(String(64))
    #: handling: environment (air, n2-glovebox, vacuum, cleanroom)
    environment: Mapped[str | None] = mapped_column(String(64))
    is_destructive: Mapped[bool] = mapped_column(default=False)
    summary: Mapped[str] = mapped_column(String(300), default="")
    #: validated parameters, seal ids, readings: a JSON object
    details: Mapped[dict[str, Any]] = mapped_column(default=dict)
    note: Mapped[str] = mapped_column(Text, default="")
    #: one form submission (or API call) that logged this event: a session covering several
    #: items shares it, and a repeated submission with the same key writes nothing new
    submission_key: Mapped[str | None] = mapped_column(String(64), index=True)
    #: electron dose of a beam step, e-/A^2 (computed or as reported by the instrument)
    electron_dose_e_per_A2: Mapped[float | None] = mapped_column(Double)
    #: electron dose rate, e-/A^2/s
    dose_rate_e_per_A2_s: Mapped[float | None] = mapped_column(Double)
    #: ion fluence of an ion-beam step, ions/cm^2
    ion_fluence_ions_per_cm2: Mapped[float | None] = mapped_column(Double)
    #: X-ray exposure, seconds
    xray_s: Mapped[float | None] = mapped_column(Double)
    #: the dose came from the instrument rather than from current x time / area
    is_dose_reported: Mapped[bool] = mapped_column(default=False)

    item: Mapped[Item] = relationship()
    actor: Mapped[Person] = relationship(foreign_keys=[actor_id])
    counterparty: Mapped[Person | None] = relationship(foreign_keys=[counterparty_id])
    station: Mapped[Station | None] = relationship()
    location: Mapped[Location | None] = relationship()

    def __repr__(self) -> str:
        return f"<Event {self.id} {self.kind} on item {self.item_id} at {self.occurred_at}>"
