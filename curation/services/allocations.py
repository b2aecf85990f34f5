"""Writes about allocations: loans of items from a facility."""

from __future__ import annotations

from datetime import datetime

from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import ledger
from curation.errors import InvalidInput, RuleViolation
from curation.model import Allocation, AllocationItem, Item, Person
from curation.services.common import aware, not_negative


def open_allocation(
    session: Session, *, actor: Person | str, reference: str, facility: str,
    investigator: Person, starts_at: datetime, report_due_at: datetime | None = None,
    expires_at: datetime | None = None, conditions: str = "",
) -> Allocation:
    """Record a loan agreed with a curation facility."""
    ledger.attribute(session, actor)
    if not reference.strip():
        raise InvalidInput("reference", reference, "the facility's non-empty reference")
    for name, value in (("starts_at", starts_at), ("report_due_at", report_due_at),
                        ("expires_at", expires_at)):
        aware(name, value)
    if session.scalar(select(Allocation.id).where(Allocation.reference == reference)) is not None:
        raise RuleViolation(f"allocation {reference!r} is already recorded")
    allocation = Allocation(
        reference=reference, facility=facility, investigator_id=investigator.id,
        starts_at=starts_at, report_due_at=report_due_at, expires_at=expires_at,
        conditions=conditions)
    session.add(allocation)
    session.flush()
    return allocation


def issue_item(
    session: Session, *, actor: Person | str, allocation: Allocation, item: Item,
    issued_at: datetime, allocated_mass_ug: float | None = None, condition_on_receipt: str = "",
) -> AllocationItem:
    """Record an item issued under an allocation."""
    ledger.attribute(session, actor)
    aware("issued_at", issued_at)
    not_negative("allocated_mass_ug", allocated_mass_ug)
    if session.scalar(select(AllocationItem.id).where(
            AllocationItem.allocation_id == allocation.id,
            AllocationItem.item_id == item.id)) is not None:
        raise RuleViolation(f"{item.code} is already issued under {allocation.reference}")
    link = AllocationItem(allocation_id=allocation.id, item_id=item.id, issued_at=issued_at,
                          allocated_mass_ug=allocated_mass_ug,
                          condition_on_receipt=condition_on_receipt)
    session.add(link)
    session.flush()
    return link
