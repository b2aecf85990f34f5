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
    #: the body that approved the loan (a sample allocation committee, ...)
    approving_body: Mapped[str] = mapped_column(String(200), default="")
    #: the laboratory that holds the loan
    laboratory: Mapped[str] = mapped_column(String(200), default="")
    #: for a transfer to another laboratory: the allocation it was carved from
    parent_id: Mapped[int | None] = mapped_column(ForeignKey("allocations.id"), index=True)

    investigator: Mapped[Person] = relationship()
    parent: Mapped[Allocation | None] = relationship(remote_side=[id])

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


class AllocationMember(Base):
    """A person named on an allocation: investigator, co-investigator, analyst."""

    __tablename__ = "allocation_members"
    __table_args__ = (UniqueConstraint("allocation_id", "person_id"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    allocation_id: Mapped[int] = mapped_column(ForeignKey("allocations.id"), index=True)
    person_id: Mapped[int] = mapped_column(ForeignKey("people.id"), index=True)
    role: Mapped[str] = mapped_column(String(32), default="co-investigator")
    added_at: Mapped[datetime] = mapped_column(default=utcnow)

    allocation: Mapped[Allocation] = relationship()
    person: Mapped[Person] = relationship()


class AllocationReport(Base):
    """A report owed to the facility for one period, and when it was sent."""

    __tablename__ = "allocation_reports"

    id: Mapped[int] = mapped_column(primary_key=True)
    allocation_id: Mapped[int] = mapped_column(ForeignKey("allocations.id"), index=True)
    period_start: Mapped[datetime]
    period_end: Mapped[datetime]
    due_at: Mapped[datetime]
    submitted_at: Mapped[datetime | None]

    allocation: Mapped[Allocation] = relationship()


class AllocationReturn(Base):
    """An item sent back to the facility, with its mass and condition."""

    __tablename__ = "allocation_returns"

    id: Mapped[int] = mapped_column(primary_key=True)
    allocation_id: Mapped[int] = mapped_column(ForeignKey("allocations.id"), index=True)
    item_id: Mapped[int] = mapped_column(ForeignKey("items.id"), index=True)
    returned_at: Mapped[datetime]
    #: micrograms at return (None when not weighed)
    mass_ug: Mapped[float | None] = mapped_column(Double)
    condition: Mapped[str] = mapped_column(String(300), default="")
    #: the custody event that sent it (shipped or released)
    event_id: Mapped[int | None] = mapped_column(ForeignKey("events.id"))
    #: a return the facility asks for by this date (None: no date set)
    due_at: Mapped[datetime | None]

    allocation: Mapped[Allocation] = relationship()
    item: Mapped[Item] = relationship()


class AllocationOutput(Base):
    """A publication or data set that came out of an allocation, by DOI."""

    __tablename__ = "allocation_outputs"
    __table_args__ = (UniqueConstraint("allocation_id", "doi"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    allocation_id: Mapped[int] = mapped_column(ForeignKey("allocations.id"), index=True)
    #: "publication" or "dataset"
    kind: Mapped[str] = mapped_column(String(16))
    doi: Mapped[str] = mapped_column(String(200))
    title: Mapped[str] = mapped_column(String(500))
    year: Mapped[int | None]
    added_at: Mapped[datetime] = mapped_column(default=utcnow)

    allocation: Mapped[Allocation] = relationship()
