"""Dispositions: a curator's answer to an audit finding. Findings themselves are computed."""

from __future__ import annotations

from datetime import datetime
from enum import StrEnum

from sqlalchemy import ForeignKey, String, Text
from sqlalchemy.orm import Mapped, mapped_column, relationship

from curation.db import Base, utcnow
from curation.model.accounts import Person
from curation.model.items import Item


class Decision(StrEnum):
    ACCEPTED = "accepted"
    FIXED = "fixed"


class Disposition(Base):
    """A decision on one finding; a later disposition of the same finding supersedes it."""

    __tablename__ = "dispositions"

    id: Mapped[int] = mapped_column(primary_key=True)
    #: the finding's stable key: "code:item id:evidence ids"
    finding_key: Mapped[str] = mapped_column(String(300), index=True)
    code: Mapped[str] = mapped_column(String(64))
    item_id: Mapped[int] = mapped_column(ForeignKey("items.id"), index=True)
    decision: Mapped[str] = mapped_column(String(16))
    reason: Mapped[str] = mapped_column(Text)
    #: the correction event that fixed it, when the decision is "fixed"
    correction_id: Mapped[int | None] = mapped_column(ForeignKey("events.id"))
    actor_id: Mapped[int] = mapped_column(ForeignKey("people.id"))
    recorded_at: Mapped[datetime] = mapped_column(default=utcnow)

    item: Mapped[Item] = relationship()
    actor: Mapped[Person] = relationship()

    def __repr__(self) -> str:
        return f"<Disposition {self.decision} {self.finding_key}>"
