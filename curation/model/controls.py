"""Contamination controls: indicators with baselines, and which samples a control travels with."""

from __future__ import annotations

from datetime import datetime

from sqlalchemy import Double, ForeignKey, String, Text, UniqueConstraint
from sqlalchemy.orm import Mapped, mapped_column, relationship

from curation.db import Base, utcnow
from curation.model.events import Event
from curation.model.items import Item
from curation.model.studies import Study


class Indicator(Base):
    """A measured contamination indicator of a study, with its baseline and threshold."""

    __tablename__ = "indicators"
    __table_args__ = (UniqueConstraint("study_id", "code"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    study_id: Mapped[int] = mapped_column(ForeignKey("studies.id"), index=True)
    #: short code, e.g. "surface-h2o", "carbon-at-pct", "na-ng-cm2"
    code: Mapped[str] = mapped_column(String(64))
    name: Mapped[str] = mapped_column(String(200))
    #: unit of value, baseline and threshold, as printed
    unit: Mapped[str] = mapped_column(String(64))
    baseline_value: Mapped[float] = mapped_column(Double)
    #: standard uncertainty of the baseline, same unit
    baseline_uncertainty: Mapped[float] = mapped_column(Double)
    #: where the baseline comes from (blank series, publication, ...)
    baseline_source: Mapped[str] = mapped_column(Text, default="")
    #: "absolute" (fail above threshold_value) or "k-sigma" (fail when z > threshold_value)
    threshold_kind: Mapped[str] = mapped_column(String(16))
    threshold_value: Mapped[float] = mapped_column(Double)
    created_at: Mapped[datetime] = mapped_column(default=utcnow)

    study: Mapped[Study] = relationship()

    def __repr__(self) -> str:
        return f"<Indicator {self.code} of study {self.study_id}>"


class ControlLink(Base):
    """A control that travels with a sample, or was present at a handling event."""

    __tablename__ = "control_links"

    id: Mapped[int] = mapped_column(primary_key=True)
    study_id: Mapped[int] = mapped_column(ForeignKey("studies.id"), index=True)
    control_id: Mapped[int] = mapped_column(ForeignKey("items.id"), index=True)
    sample_id: Mapped[int | None] = mapped_column(ForeignKey("items.id"), index=True)
    event_id: Mapped[int | None] = mapped_column(ForeignKey("events.id"), index=True)
    note: Mapped[str] = mapped_column(Text, default="")
    created_at: Mapped[datetime] = mapped_column(default=utcnow)

    control: Mapped[Item] = relationship(foreign_keys=[control_id])
    sample: Mapped[Item | None] = relationship(foreign_keys=[sample_id])
    event: Mapped[Event | None] = relationship()

    def __repr__(self) -> str:
        return f"<ControlLink control {self.control_id} sample {self.sample_id} event {self.event_id}>"
