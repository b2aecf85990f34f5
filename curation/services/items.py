"""Writes about items and their two relations: derived from, placed in."""

from __future__ import annotations

from datetime import datetime

from sqlalchemy import func, or_, select
from sqlalchemy.orm import Session

from curation import history, ledger
from curation.errors import (
    ContainmentCycle, DerivationCycle, DuplicateCode, InvalidInput, OverlappingPlacement,
    RuleViolation,
)
from curation.model import Derivation, Event, Item, ItemKind, ItemStatus, Method, Person, Placement
from curation.services.common import aware, not_negative, one_of

#: characters allowed in an item code (printed on labels and typed by scanners)
CODE_CHARS = set("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789-_.")


def check_code(code: str) -> str:
    """Refuse a code a label printer or a scanner would mangle."""
    if not code or len(code) > 64 or not set(code) <= CODE_CHARS:
        raise InvalidInput("code", code, "1 to 64 letters, digits, '-', '_' or '.'")
    return code


def register_item(
    session: Session, *, actor: Person | str, code: str, kind: str, created_at: datetime,
    material: str = "", description: str = "", is_pristine: bool = False,
    status: str = ItemStatus.REGISTERED.value,
    mass_ug: float | None = None, mass_uncertainty_ug: float | None = None,
    mass_method: str | None = None, volume_um3: float | None = None,
    volume_uncertainty_um3: float | None = None, volume_method: str | None = None,
) -> Item:
    """Register an item under a new, never-used code."""
    ledger.attribute(session, actor)
    check_code(code)
    one_of("kind", kind, [k.value for k in ItemKind])
    one_of("status", status, [s.value for s in ItemStatus])
    aware("created_at", created_at)
    for name, value in (("mass_ug", mass_ug), ("mass_uncertainty_ug", mass_uncertainty_ug),
                        ("volume_um3", volume_um3),
                        ("volume_uncertainty_um3", volume_uncertainty_um3)):
        not_negative(name, value)
    methods = [m.value for m in Method]
    if mass_method is not None:
        one_of("mass_method", mass_method, methods)
    if volume_method is not None:
        one_of("volume_method", volume_method, methods)
    if session.scalar(select(Item.id).where(func.lower(Item.code) == code.lower())) is not None:
        raise DuplicateCode(f"code {code!r} is already in use (codes are never reused)")
    item = Item(
        code=code, kind=kind, created_at=created_at, material=material, description=description,
        is_pristine=is_pristine, status=status, mass_ug=mass_ug,
        mass_uncertainty_ug=mass_uncertainty_ug, mass_method=mass_method, volume_um3=volume_um3,
        volume_uncertainty_um3=volume_uncertainty_um3, volume_method=volume_method,
    )
    session.add(item)
    session.flush()
    return item


def derive(
    session: Session, *, actor: Person | str, parent: Item, child: Item, derived_at: datetime,
    step: Event | None = None, removed_volume_um3: float | None = None,
) -> Derivation:
    """Record that `child` was cut from `parent` at `derived_at` (by `step`, if given)."""
    ledger.attribute(session, actor)
    aware("derived_at", derived_at)
    not_negative("removed_volume_um3", removed_volume_um3)
    if parent.id == child.id:
        raise DerivationCycle(f"{child.code} cannot be derived from itself")
    lineage = {a for a, _, _ in history.ancestors(session, parent.id)}
    if child.id in lineage:
        raise DerivationCycle(
            f"{child.code} is already an ancestor of {parent.code}: "
            f"deriving {child.code} from {parent.code} would make a cycle")
    if session.scalar(select(Derivation.id).where(
            Derivation.parent_id == parent.id, Derivation.child_id == child.id)) is not None:
        raise RuleViolation(f"{child.code} is already recorded as derived from {parent.code}")
    derivation = Derivation(
        parent_id=parent.id, child_id=child.id, derived_at=derived_at,
        step_id=step.id if step is not None else None, removed_volume_um3=removed_volume_um3)
    session.add(derivation)
    session.flush()
    return derivation


def _overlapping(session: Session, item: Item, start: datetime, end: datetime | None) -> Placement | None:
    """Another placement of the item that overlaps [start, end) in time."""
    p = Placement
    cond = [p.item_id == item.id, or_(p.removed_at.is_(None), p.removed_at > start)]
    if end is not None:
        cond.append(p.placed_at < end)
    return session.scalars(select(p).where(*cond).order_by(p.placed_at).limit(1)).first()


def place(
    session: Session, *, actor: Person | str, item: Item, container: Item, placed_at: datetime,
    removed_at: datetime | None = None, position: str = "",
) -> Placement:
    """Place an item in a container from `placed_at` (until `removed_at`, if known)."""
    ledger.attribute(session, actor)
    aware("placed_at", placed_at)
    aware("removed_at", removed_at)
    if removed_at is not None and removed_at < placed_at:
        raise InvalidInput("removed_at", removed_at.isoformat(),
                           f"at or after placed_at {placed_at.isoformat()}")
    if item.id == container.id:
        raise ContainmentCycle(f"{item.code} cannot be placed in itself")
    inside = {w.subject_id for w in history.containers_during(session, container.id, placed_at,
                                                               removed_at)}
    if item.id in inside:
        raise ContainmentCycle(
            f"{container.code} sits inside {item.code} at that time: placing {item.code} "
            f"in {container.code} would make a container contain itself")
    clash = _overlapping(session, item, placed_at, removed_at)
    if clash is not None:
        raise OverlappingPlacement(
            f"{item.code} is already placed in item {clash.container.code} from "
            f"{clash.placed_at.isoformat()} to "
            f"{clash.removed_at.isoformat() if clash.removed_at else 'now'}; remove it first")
    placement = Placement(item_id=item.id, container_id=container.id, position=position,
                          placed_at=placed_at, removed_at=removed_at)
    session.add(placement)
    session.flush()
    return placement


def current_placement(session: Session, item: Item) -> Placement | None:
    """The open placement of the item (no removal recorded), if any."""
    return session.scalars(select(Placement).where(
        Placement.item_id == item.id, Placement.removed_at.is_(None))).first()


def take_out(session: Session, *, actor: Person | str, item: Item, removed_at: datetime) -> Placement:
    """Close the item's open placement at `removed_at`."""
    ledger.attribute(session, actor)
    aware("removed_at", removed_at)
    placement = current_placement(session, item)
    if placement is None:
        raise RuleViolation(f"{item.code} is not in any container")
    if removed_at < placement.placed_at:
        raise InvalidInput("removed_at", removed_at.isoformat(),
                           f"at or after placed_at {placement.placed_at.isoformat()}")
    placement.removed_at = removed_at
    session.flush()
    return placement


def move(
    session: Session, *, actor: Person | str, item: Item, container: Item, moved_at: datetime,
    position: str = "",
) -> Placement:
    """Take the item out of its container (if any) and place it in another at one instant."""
    if current_placement(session, item) is not None:
        take_out(session, actor=actor, item=item, removed_at=moved_at)
    return place(session, actor=actor, item=item, container=container, placed_at=moved_at,
                 position=position)


def set_status(session: Session, *, actor: Person | str, item: Item, status: str) -> Item:
    """Change an item's status (the ledger keeps every earlier one)."""
    ledger.attribute(session, actor)
    one_of("status", status, [s.value for s in ItemStatus])
    item.status = status
    session.flush()
    return item
