"""Items and the two relations that make the graph: derived from, placed in."""

from __future__ import annotations

from datetime import datetime
from enum import StrEnum

from sqlalchemy import CheckConstraint, Double, ForeignKey, Index, String, Text, UniqueConstraint
from sqlalchemy.orm import Mapped, mapped_column, relationship

from curation.db import Base, utcnow


class ItemKind(StrEnum):
    PARTICLE = "particle"
    FRAGMENT = "fragment"
    LAMELLA = "lamella"
    WEDGE = "wedge"
    NEEDLE = "needle"
    MOUNT = "mount"
    STUB = "stub"
    GRID = "grid"
    COUPON = "coupon"
    CAPSULE = "capsule"
    CONTAINER = "container"
    BLANK = "procedural-blank"
    ANALOGUE = "analogue-standard"
    WITNESS = "witness-coupon"
    MISSION_WITNESS = "mission-witness"


#: kinds that are control samples rather than specimens
CONTROL_KINDS = frozenset({ItemKind.BLANK, ItemKind.ANALOGUE, ItemKind.WITNESS,
                           ItemKind.MISSION_WITNESS})


class ItemStatus(StrEnum):
    REGISTERED = "registered"
    STORED = "stored"
    IN_ANALYSIS = "in-analysis"
    CONSUMED = "consumed"
    RETURNED = "returned"
    LOST = "lost"


class Method(StrEnum):
    """How a mass or a volume was obtained."""

    WEIGHED = "weighed"
    XCT = "xct"
    DIMENSIONS = "dimensions"
    ESTIMATED = "estimated"


class Item(Base):
    """Any physical thing with a label: particle, lamella, needle, mount, coupon, control."""

    __tablename__ = "items"

    id: Mapped[int] = mapped_column(primary_key=True)
    #: the human code printed on the label; unique and never reused
    code: Mapped[str] = mapped_column(String(64), unique=True)
    kind: Mapped[str] = mapped_column(String(32), index=True)
    material: Mapped[str] = mapped_column(String(200), default="")
    status: Mapped[str] = mapped_column(String(20), default=ItemStatus.REGISTERED.value)
    description: Mapped[str] = mapped_column(Text, default="")
    #: kept away from air and terrestrial contact since it was opened
    is_pristine: Mapped[bool] = mapped_column(default=False)
    #: micrograms
    mass_ug: Mapped[float | None] = mapped_column(Double)
    #: standard uncertainty of mass_ug, micrograms
    mass_uncertainty_ug: Mapped[float | None] = mapped_column(Double)
    mass_method: Mapped[str | None] = mapped_column(String(20))
    #: cubic micrometres
    volume_um3: Mapped[float | None] = mapped_column(Double)
    #: standard uncertainty of volume_um3, cubic micrometres
    volume_uncertainty_um3: Mapped[float | None] = mapped_column(Double)
    volume_method: Mapped[str | None] = mapped_column(String(20))
    #: when the item came to exist for the lab (received, or cut from its parent)
    created_at: Mapped[datetime] = mapped_column(index=True)
    recorded_at: Mapped[datetime] = mapped_column(default=utcnow)

    parents: Mapped[list[Derivation]] = relationship(
        foreign_keys="Derivation.child_id", back_populates="child", viewonly=True
    )

    def __repr__(self) -> str:
        return f"<Item {self.code} ({self.kind})>"


class Derivation(Base):
    """Child item <- parent item, made by one step at one instant."""

    __tablename__ = "derivations"
    __table_args__ = (
        UniqueConstraint("parent_id", "child_id"),
        CheckConstraint("parent_id <> child_id", name="not_self"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    parent_id: Mapped[int] = mapped_column(ForeignKey("items.id"), index=True)
    child_id: Mapped[int] = mapped_column(ForeignKey("items.id"), index=True)
    #: the step that cut the child (lift-out, split, sharpening), if recorded
    step_id: Mapped[int | None] = mapped_column(ForeignKey("events.id"), index=True)
    derived_at: Mapped[datetime]
    #: cubic micrometres removed from the parent by the step that made the child
    removed_volume_um3: Mapped[float | None] = mapped_column(Double)
    recorded_at: Mapped[datetime] = mapped_column(default=utcnow)

    parent: Mapped[Item] = relationship(foreign_keys=[parent_id])
    child: Mapped[Item] = relationship(foreign_keys=[child_id], back_populates="parents")

    def __repr__(self) -> str:
        return f"<Derivation {self.parent_id} -> {self.child_id} at {self.derived_at}>"


class Placement(Base):
    """Item placed in a container item over [placed_at, removed_at], optionally at a position."""

    __tablename__ = "placements"
    __table_args__ = (
        CheckConstraint("item_id <> container_id", name="not_self"),
        Index("ix_placements_item_time", "item_id", "placed_at"),
        Index("ix_placements_container_time", "container_id", "placed_at"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    item_id: Mapped[int] = mapped_column(ForeignKey("items.id"))
    container_id: Mapped[int] = mapped_column(ForeignKey("items.id"))
    #: slot, post number or grid square, as printed on the container
    position: Mapped[str] = mapped_column(String(64), default="")
    placed_at: Mapped[datetime]
    #: None while the item is still in the container
    removed_at: Mapped[datetime | None]
    recorded_at: Mapped[datetime] = mapped_column(default=utcnow)

    item: Mapped[Item] = relationship(foreign_keys=[item_id])
    container: Mapped[Item] = relationship(foreign_keys=[container_id])

    def __repr__(self) -> str:
        return f"<Placement {self.item_id} in {self.container_id} from {self.placed_at}>"
