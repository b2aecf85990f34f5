"""Allocations: items a facility lends to an investigator."""

from __future__ import annotations

from datetime import datetime

from sqlalchemy import Double, ForeignKey, String, Text, UniqueConstraint
from sqlalchemy.orm import Mapped, mapped_column, relationship

from curation.db import Base, utcnow
from curation.model.accounts import Person
from curation.model.items import Item


class Allocation(Base):
    """A loan of items from a curation facility to an investigator."""

    __tablename__ = "allocations"

    id: Mapped[int] = mapped_column(primary_key=True)
    #: the facility's reference for the loan
    reference: Mapped[str] = mapped_column(String(64), unique=True)
    facility: Mapped[str] = mapped_column(String(200))
    investigator_id: Mapped[int] = mapped_column(ForeignKey("people.id"), index=True)
    conditions: Mapped[str] = mapped_column(Text, default="")
    starts_at: Mapped[datetime]
    report_due_at: Mapped[datetime | None]
    expires_at: Mapped[datetime | None]
    created_at: Mapped[datetime] = mapped_column(default=utcnow)

    investigator: Mapped[Person] = relationship()

    def __repr__(self) -> str:
        return f"<Allocation {self.reference}>"


class AllocationItem(Base):
    """An item issued under an allocation, with its allocated mass."""

    __tablename__ = "allocation_items"
    __table_args__ = (UniqueConstraint("allocation_id", "item_id"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    allocation_id: Mapped[int] = mapped_column(ForeignKey("allocations.id"), index=True)
    item_id: Mapped[int] = mapped_column(ForeignKey("items.id"), index=True)
    #: micrograms, as stated by the facility
    allocated_mass_ug: Mapped[float | None] = mapped_column(Double)
    condition_on_receipt: Mapped[str] = mapped_column(String(300), default="")
    issued_at: Mapped[datetime]

    allocation: Mapped[Allocation] = relationship()
    item: Mapped[Item] = relationship()
