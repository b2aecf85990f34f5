"""Writes about allocations: loans of items from a facility, who works under them, the reports
owed, the items sent back, the transfers to another laboratory and what came out of them.

Every refusal names the field and the value (`InvalidInput`) or the rule (`RuleViolation`).
"""

from __future__ import annotations

import re
from datetime import datetime, timedelta

from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import history, ledger
from curation.errors import InvalidInput, RuleViolation
from curation.model import (
    Allocation,
    AllocationItem,
    AllocationMember,
    AllocationOutput,
    AllocationReport,
    AllocationReturn,
    Event,
    Item,
    Person,
)
from curation.services.common import _one, aware, not_negative, one_of

#: roles a person can hold on an allocation
MEMBER_ROLES = ("investigator", "co-investigator", "analyst", "curator")
#: what an allocation can produce
OUTPUT_KINDS = ("publication", "dataset")
#: a DOI as DataCite's 4.5 JSON schema writes it (properties.doi in the `datacite` package):
#: "10." + a registrant code of 4 to 9 digits + "/" + a suffix without white space
DOI_PATTERN = re.compile(r"^10[.][0-9]{4,9}[/][^\s]+$")
#: custody actions that can send an item back to the facility
RETURN_ACTIONS = ("release", "shipped")


def _text(field: str, value: str, allowed: str) -> str:
    if not value or not value.strip():
        raise InvalidInput(field, value, allowed)
    return value.strip()


def _order(first: str, start: datetime | None, second: str, end: datetime | None) -> None:
    if start is not None and end is not None and end < start:
        raise InvalidInput(second, end.isoformat(), f"on or after {first} ({start.isoformat()})")


def open_allocation(
    session: Session, *, actor: Person | str, reference: str, facility: str,
    investigator: Person, starts_at: datetime, report_due_at: datetime | None = None,
    expires_at: datetime | None = None, conditions: str = "", approving_body: str = "",
    laboratory: str = "", parent: Allocation | None = None,
) -> Allocation:
    """Record a loan agreed with a curation facility (or a transfer carved from one)."""
    ledger.attribute(session, actor)
    reference = _text("reference", reference, "the facility's non-empty reference")
    facility = _text("facility", facility, "the lending facility's name")
    for name, value in (("starts_at", starts_at), ("report_due_at", report_due_at),
                        ("expires_at", expires_at)):
        aware(name, value)
    _order("starts_at", starts_at, "expires_at", expires_at)
    _order("starts_at", starts_at, "report_due_at", report_due_at)
    if session.scalar(select(Allocation.id).where(Allocation.reference == reference)) is not None:
        raise InvalidInput("reference", reference, "a reference not already recorded")
    allocation = Allocation(
        reference=reference, facility=facility, investigator_id=investigator.id,
        starts_at=starts_at, report_due_at=report_due_at, expires_at=expires_at,
        conditions=conditions, approving_body=approving_body.strip(),
        laboratory=laboratory.strip(), parent_id=parent.id if parent else None)
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
    if issued_at < allocation.starts_at:
        raise InvalidInput("issued_at", issued_at.isoformat(),
                           f"on or after the allocation starts ({allocation.starts_at.isoformat()})")
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


def add_member(session: Session, *, actor: Person | str, allocation: Allocation,
               person: Person, role: str = "co-investigator") -> AllocationMember:
    """Name a person who may work on the allocation's items."""
    ledger.attribute(session, actor)
    one_of("role", role, MEMBER_ROLES)
    if session.scalar(select(AllocationMember.id).where(
            AllocationMember.allocation_id == allocation.id,
            AllocationMember.person_id == person.id)) is not None:
        raise InvalidInput("person", person.username,
                           f"someone not already named on {allocation.reference}")
    member = AllocationMember(allocation_id=allocation.id, person_id=person.id, role=role)
    session.add(member)
    session.flush()
    return member


def add_reporting_period(session: Session, *, actor: Person | str, allocation: Allocation,
                         period_start: datetime, period_end: datetime,
                         due_at: datetime) -> AllocationReport:
    """A report the facility expects for one period, and when it is due."""
    ledger.attribute(session, actor)
    for name, value in (("period_start", period_start), ("period_end", period_end),
                        ("due_at", due_at)):
        aware(name, value)
    _order("period_start", period_start, "period_end", period_end)
    _order("period_end", period_end, "due_at", due_at)
    report = AllocationReport(allocation_id=allocation.id, period_start=period_start,
                              period_end=period_end, due_at=due_at)
    session.add(report)
    session.flush()
    return report


def submit_report(session: Session, *, actor: Person | str, report: AllocationReport,
                  submitted_at: datetime) -> AllocationReport:
    """Record that the report for a period was sent to the facility."""
    ledger.attribute(session, actor)
    aware("submitted_at", submitted_at)
    if report.submitted_at is not None:
        raise InvalidInput("report", report.id,
                           f"a report not yet submitted (sent {report.submitted_at.isoformat()})")
    _order("period_start", report.period_start, "submitted_at", submitted_at)
    report.submitted_at = submitted_at
    session.flush()
    return report


def _issued_under(session: Session, allocation: Allocation, item: Item) -> AllocationItem:
    """The issue row the item (or an ancestor of it) came under, or InvalidInput."""
    lineage = [item.id] + [a for a, _, _ in history.ancestors(session, item.id)]
    link = session.scalars(select(AllocationItem).where(
        AllocationItem.allocation_id == allocation.id,
        AllocationItem.item_id.in_(lineage))).first()
    if link is None:
        raise InvalidInput("item", item.code, f"an item issued under {allocation.reference} "
                                              "or cut from one")
    return link


def _check_return_event(session: Session, item: Item, event: Event) -> None:
    """The event must send the item itself, or a container it sat in at that moment."""
    held = {w.subject_id for w in history.containers_during(
        session, item.id, event.occurred_at, event.occurred_at + timedelta(seconds=1))}
    if event.action not in RETURN_ACTIONS or event.item_id not in {item.id, *held}:
        raise InvalidInput("event", event.id, f"a {' or '.join(RETURN_ACTIONS)} custody event "
                                              f"on {item.code} or on a container holding it")


def record_return(session: Session, *, actor: Person | str, allocation: Allocation,
                  item: Item, returned_at: datetime, mass_ug: float | None = None,
                  condition: str = "", event: Event | None = None,
                  due_at: datetime | None = None) -> AllocationReturn:
    """An item (issued, or cut from one: a section, a mount) sent back to the facility."""
    ledger.attribute(session, actor)
    aware("returned_at", returned_at)
    aware("due_at", due_at)
    not_negative("mass_ug", mass_ug)
    link = _issued_under(session, allocation, item)
    _order("issued_at", link.issued_at, "returned_at", returned_at)
    if event is not None:
        _check_return_event(session, item, event)
    if session.scalar(select(AllocationReturn.id).where(
            AllocationReturn.allocation_id == allocation.id,
            AllocationReturn.item_id == item.id)) is not None:
        raise InvalidInput("item", item.code, f"an item not already returned under "
                                              f"{allocation.reference}")
    row = AllocationReturn(allocation_id=allocation.id, item_id=item.id, returned_at=returned_at,
                           mass_ug=mass_ug, condition=condition.strip(),
                           event_id=event.id if event else None, due_at=due_at)
    session.add(row)
    session.flush()
    return row


def transfer(session: Session, *, actor: Person | str, allocation: Allocation, reference: str,
             laboratory: str, investigator: Person, items: list[Item], issued_at: datetime,
             expires_at: datetime | None = None, conditions: str = "") -> Allocation:
    """Carve a sub-allocation for another laboratory out of an allocation, issuing items
    that came under it (its own custody chain is kept by the custody events)."""
    ledger.attribute(session, actor)
    _text("laboratory", laboratory, "the receiving laboratory's name")
    if not items:
        raise InvalidInput("items", "", "at least one item to transfer")
    for item in items:
        _issued_under(session, allocation, item)
    if allocation.expires_at is not None and expires_at is not None \
            and expires_at > allocation.expires_at:
        raise InvalidInput("expires_at", expires_at.isoformat(),
                           f"no later than {allocation.reference} expires "
                           f"({allocation.expires_at.isoformat()})")
    child = open_allocation(
        session, actor=actor, reference=reference, facility=allocation.facility,
        investigator=investigator, starts_at=issued_at,
        expires_at=expires_at or allocation.expires_at, conditions=conditions,
        approving_body=allocation.approving_body, laboratory=laboratory, parent=allocation)
    for item in items:
        issue_item(session, actor=actor, allocation=child, item=item, issued_at=issued_at)
    return child


def check_doi(doi: str) -> str:
    """The DOI without a resolver prefix, or InvalidInput naming it."""
    text = (doi or "").strip()
    for prefix in ("https://doi.org/", "http://doi.org/", "https://dx.doi.org/", "doi:"):
        if text.lower().startswith(prefix):
            text = text[len(prefix):]
    if not DOI_PATTERN.match(text):
        raise InvalidInput("doi", doi, "a DOI such as 10.1234/abc-5 ('10.', 4 to 9 digits, "
                                       "'/', a suffix without spaces)")
    return text


def add_output(session: Session, *, actor: Person | str, allocation: Allocation, kind: str,
               doi: str, title: str, year: int | None = None) -> AllocationOutput:
    """A publication or a data set that came out of the allocation, by its DOI."""
    ledger.attribute(session, actor)
    one_of("kind", kind, OUTPUT_KINDS)
    doi = check_doi(doi)
    title = _text("title", title, "the publication's or data set's title")
    if year is not None and not 1900 <= year <= 2999:
        raise InvalidInput("year", year, "a four-digit year")
    if session.scalar(select(AllocationOutput.id).where(
            AllocationOutput.allocation_id == allocation.id,
            AllocationOutput.doi == doi)) is not None:
        raise InvalidInput("doi", doi, f"a DOI not already listed under {allocation.reference}")
    output = AllocationOutput(allocation_id=allocation.id, kind=kind, doi=doi, title=title,
                              year=year)
    session.add(output)
    session.flush()
    return output


def allocation_by_reference(session: Session, reference: str) -> Allocation:
    """The allocation with this reference, or NotFound naming it."""
    return _one(session, Allocation, Allocation.reference, reference, "allocation with reference")
