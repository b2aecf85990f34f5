"""Studies: analysis campaigns with their rules, and the items they cover."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import ForeignKey, String, Text, UniqueConstraint
from sqlalchemy.orm import Mapped, mapped_column, relationship

from curation.db import Base, utcnow
from curation.model.accounts import Person
from curation.model.items import Item


class Study(Base):
    """An analysis campaign: its rules (limits, environment, order) and its items."""

    __tablename__ = "studies"

    id: Mapped[int] = mapped_column(primary_key=True)
    code: Mapped[str] = mapped_column(String(64), unique=True)
    title: Mapped[str] = mapped_column(String(300))
    lead_id: Mapped[int | None] = mapped_column(ForeignKey("people.id"))
    #: limits and requirements, e.g. {"max_air_minutes": 0, "max_electron_dose_e_per_A2": 100}
    rules: Mapped[dict[str, Any]] = mapped_column(default=dict)
    description: Mapped[str] = mapped_column(Text, default="")
    created_at: Mapped[datetime] = mapped_column(default=utcnow)

    lead: Mapped[Person | None] = relationship()

    def __repr__(self) -> str:
        return f"<Study {self.code}>"


class StudyItem(Base):
    """An item enrolled in a study, as a specimen or as a control."""

    __tablename__ = "study_items"
    __table_args__ = (UniqueConstraint("study_id", "item_id"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    study_id: Mapped[int] = mapped_column(ForeignKey("studies.id"), index=True)
    item_id: Mapped[int] = mapped_column(ForeignKey("items.id"), index=True)
    #: "specimen" or "control"
    role: Mapped[str] = mapped_column(String(16), default="specimen")
    added_at: Mapped[datetime] = mapped_column(default=utcnow)

    study: Mapped[Study] = relationship()
    item: Mapped[Item] = relationship()
