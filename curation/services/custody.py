"""Custody and handling writes: hand-overs as release + receipt, storage, seals, shipping,
inventory checks, exposures to an environment. Each is an event on the item's timeline;
custody of a container covers what sits inside it (the resolver's placed-in relation)."""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime
from enum import StrEnum
from typing import Any

from sqlalchemy.orm import Session

from curation.errors import InvalidInput
from curation.model import Event, Item, Location, Person
from curation.services.common import one_of
from curation.services.events import record_event


class CustodyAction(StrEnum):
    RELEASE = "release"
    RECEIPT = "receipt"
    STORE = "store"
    SEAL_APPLIED = "seal-applied"
    SEAL_CHECKED = "seal-checked"
    SEAL_BROKEN = "seal-broken"
    SHIPPED = "shipped"
    DELIVERED = "delivered"
    INVENTORY = "inventory-check"


class Environment(StrEnum):
    AIR = "air"
    GLOVEBOX = "n2-glovebox"
    VACUUM = "vacuum"
    CLEANROOM = "cleanroom"


#: materials allowed to touch a specimen (a controlled list; extend it deliberately)
CONTACT_MATERIALS = (
    "ptfe", "stainless-steel", "titanium", "tungsten", "silicon", "copper-grid", "gold-grid",
    "molybdenum-grid", "carbon-tape", "indium", "epoxy", "glass", "quartz", "aluminium",
    "nitrile-glove", "polypropylene",
)


def _custody(session: Session, *, actor: Person, item: Item, action: CustodyAction,
             at: datetime, **fields: Any) -> Event:
    return record_event(session, actor=actor, kind="custody", item=item, occurred_at=at,
                        action=action.value, **fields)


def release(session: Session, *, actor: Person, item: Item, to: Person, at: datetime,
            location: Location | None = None, note: str = "") -> Event:
    """The custodian hands the item over; custody passes only when `to` records a receipt."""
    return _custody(session, actor=actor, item=item, action=CustodyAction.RELEASE, at=at,
                    counterparty=to, location=location, note=note,
                    summary=f"released to {to.name}")


def receive(session: Session, *, actor: Person, item: Item, giver: Person | None, at: datetime,
            location: Location | None = None, condition: str = "", note: str = "") -> Event:
    """The new custodian (the actor) takes the item, from `giver` or off a delivery."""
    who = f" from {giver.name}" if giver is not None else ""
    return _custody(session, actor=actor, item=item, action=CustodyAction.RECEIPT, at=at,
                    counterparty=giver, location=location, note=note,
                    details={"condition": condition} if condition else {},
                    summary=f"received{who}")


def store(session: Session, *, actor: Person, item: Item, location: Location, at: datetime,
          slot: str = "", note: str = "") -> Event:
    """Put the item away in a store (and slot), under the actor's custody."""
    return _custody(session, actor=actor, item=item, action=CustodyAction.STORE, at=at,
                    location=location, details={"slot": slot} if slot else {}, note=note,
                    summary=f"stored in {location.name}" + (f", slot {slot}" if slot else ""))


def seal(session: Session, *, actor: Person, item: Item, action: str, seal_id: str,
         at: datetime, intact: bool = True, location: Location | None = None,
         note: str = "") -> Event:
    """Apply, check or break a tamper-evident seal, by its id."""
    one_of("action", action, [a.value for a in (CustodyAction.SEAL_APPLIED,
                                                CustodyAction.SEAL_CHECKED,
                                                CustodyAction.SEAL_BROKEN)])
    if not seal_id.strip():
        raise InvalidInput("seal_id", seal_id, "the id printed on the seal")
    details: dict[str, Any] = {"seal_id": seal_id}
    if action == CustodyAction.SEAL_CHECKED:
        details["intact"] = intact
    return _custody(session, actor=actor, item=item, action=CustodyAction(action), at=at,
                    location=location, details=details, note=note,
                    summary=f"{action.replace('-', ' ')}: {seal_id}")


def ship(session: Session, *, actor: Person, item: Item, at: datetime, carrier: str,
         tracking_id: str, to: Person | None = None, location: Location | None = None,
         note: str = "") -> Event:
    """Hand the (sealed) item to a carrier, naming the intended recipient."""
    if not carrier.strip():
        raise InvalidInput("carrier", carrier, "the carrier's name")
    return _custody(session, actor=actor, item=item, action=CustodyAction.SHIPPED, at=at,
                    counterparty=to, location=location, note=note,
                    details={"carrier": carrier, "tracking_id": tracking_id},
                    summary=f"shipped with {carrier} ({tracking_id})")


def deliver(session: Session, *, actor: Person, item: Item, at: datetime, condition: str,
            location: Location | None = None, note: str = "") -> Event:
    """The carrier's delivery, with the condition of the package on arrival."""
    return _custody(session, actor=actor, item=item, action=CustodyAction.DELIVERED, at=at,
                    location=location, details={"condition": condition}, note=note,
                    summary=f"delivered ({condition})")


def check_inventory(session: Session, *, actor: Person, item: Item, location: Location,
                    at: datetime, found: bool = True, note: str = "") -> Event:
    """The custodian attests the item is (or is not) where the record says."""
    return _custody(session, actor=actor, item=item, action=CustodyAction.INVENTORY, at=at,
                    location=location, details={"found": found}, note=note,
                    summary="inventory: found" if found else "inventory: NOT found")


def handle(session: Session, *, actor: Person, item: Item, environment: str, start: datetime,
           end: datetime, location: Location | None = None, o2_ppm: float | None = None,
           h2o_ppm: float | None = None, iso_class: float | None = None,
           contact_materials: Sequence[str] = (), tools: Sequence[str] = (),
           controls: Sequence[str] = (), note: str = "") -> Event:
    """An exposure of the item to an environment over [start, end], with what touched it."""
    one_of("environment", environment, [e.value for e in Environment])
    for material in contact_materials:
        one_of("contact_materials", material, CONTACT_MATERIALS)
    if iso_class is not None and not 1 <= iso_class <= 9:
        raise InvalidInput("iso_class", iso_class, "ISO 14644-1 class from 1 to 9")
    for name, value in (("o2_ppm", o2_ppm), ("h2o_ppm", h2o_ppm)):
        if value is not None and value < 0:
            raise InvalidInput(name, value, "zero or more ppm")
    details = {k: v for k, v in (
        ("o2_ppm", o2_ppm), ("h2o_ppm", h2o_ppm), ("iso_class", iso_class),
        ("contact_materials", list(contact_materials)), ("tools", list(tools)),
        ("controls", list(controls))) if v not in (None, [])}
    minutes = (end - start).total_seconds() / 60 if end >= start else 0
    return record_event(session, actor=actor, kind="handling", item=item, occurred_at=start,
                        ended_at=end, environment=environment, location=location,
                        details=details, note=note,
                        summary=f"{environment} for {minutes:.0f} min")
