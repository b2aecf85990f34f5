"""Who may write what: the rules that depend on the item or the station, not only the role."""

from __future__ import annotations

from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import history
from curation.model import (
    Allocation,
    AllocationItem,
    AllocationMember,
    Event,
    Item,
    Person,
    Station,
)

#: roles that may write to any item
ANY_ITEM = frozenset({"admin", "curator"})


def member_allocations(session: Session, person: Person) -> set[int]:
    """Ids of the allocations the person belongs to (member or investigator) and their subs."""
    seed = select(Allocation.id).where(Allocation.id.in_(
        select(AllocationMember.allocation_id).where(AllocationMember.person_id == person.id)
    ) | (Allocation.investigator_id == person.id)).cte("mine", recursive=True)
    tree = seed.union_all(select(Allocation.id).join(seed, Allocation.parent_id == seed.c.id))
    return set(session.scalars(select(tree.c.id)))


def _station_instrument(session: Session, station_id: int | None) -> int | None:
    if station_id is None:
        return None
    return session.scalar(select(Station.instrument_id).where(Station.id == station_id))


def may_use_station(session: Session, person: Person, station: Station) -> bool:
    """Whether the person may record steps at this station."""
    if person.role == "station":
        own = _station_instrument(session, person.station_id)
        return station.id == person.station_id or (own is not None
                                                   and own == station.instrument_id)
    return person.role in ANY_ITEM or person.role == "analyst"


def may_write_item(session: Session, person: Person, item: Item) -> bool:
    """Whether the person may record on this item (analysts: their allocations' items)."""
    if person.role in ANY_ITEM:
        return True
    lineage = {item.id, *(row[0] for row in history.ancestors(session, item.id))}
    if person.role == "analyst":
        issued = set(session.scalars(select(AllocationItem.allocation_id)
                                     .where(AllocationItem.item_id.in_(lineage))))
        return bool(issued & member_allocations(session, person))
    if person.role == "station":
        # A station writes only where its instrument has worked on the item or its ancestors.
        own = _station_instrument(session, person.station_id)
        return own is not None and session.scalar(
            select(Event.id).join(Station, Event.station_id == Station.id)
            .where(Event.item_id.in_(lineage), Station.instrument_id == own).limit(1)
        ) is not None
    return False
