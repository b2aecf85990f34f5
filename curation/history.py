"""The history resolver: the one timeline every audit, budget and report reads.

The effective history of an item up to an instant is
  * its own events,
  * the events of every container it sat in, while it sat there (containers nest), and
  * the effective history of each ancestor up to the instant the item was cut from it.
Windows are closed intervals: an event at the instant of placement, removal or cutting
belongs to the window (the lift-out that made a lamella is part of the lamella's history).
Everything is computed with recursive SQL (one statement per question), never a query per node.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlalchemy import (
    Integer, Text, case, cast, func, literal, null, or_, select, type_coerce,
)
from sqlalchemy.orm import Session, joinedload
from sqlalchemy.sql.expression import ColumnElement
from sqlalchemy.types import DateTime

from curation.db import UTCDateTime
from curation.model import Derivation, Event, Item, Placement

#: recursion guards: far deeper than any real lineage or nesting of containers
MAX_LINEAGE_DEPTH = 64
MAX_NESTING_DEPTH = 32

OWN, CONTAINER, ANCESTOR, ANCESTOR_CONTAINER = "own", "container", "ancestor", "ancestor-container"

#: what every reader of a history shows beside an event; many-to-one, so joined into the one
#: statement (five extra SELECT ... IN round trips cost more than the resolver itself)
_EVENT_PEOPLE_AND_PLACES = (
    joinedload(Event.actor), joinedload(Event.station), joinedload(Event.location),
    joinedload(Event.item), joinedload(Event.counterparty),
)


@dataclass(frozen=True)
class HistoryEntry:
    """One event of an item's effective history, and how it reached the item."""

    event: Event
    #: own, container, ancestor or ancestor-container
    reach: str
    #: the ancestor whose history it came from (None when own or via the item's container)
    ancestor_id: int | None
    #: the container it came through (None when the event is on the item or the ancestor)
    container_id: int | None
    #: item ids from the item up to the event's subject, e.g. (needle, lamella, particle, capsule)
    path: tuple[int, ...]

    @property
    def is_inherited(self) -> bool:
        return self.reach != OWN


@dataclass(frozen=True)
class Window:
    """A subject (ancestor or container) whose events reach the item within [start, end]."""

    subject_id: int
    start: datetime | None
    end: datetime | None
    ancestor_id: int
    ancestor_depth: int
    nesting_depth: int
    path: tuple[int, ...]


def _ts(session: Session, value: datetime | None) -> ColumnElement[Any]:
    """A typed timestamp literal (PostgreSQL needs the type inside a recursive CTE)."""
    expr = literal(value, UTCDateTime()) if value is not None else null()
    if session.get_bind().dialect.name == "postgresql":
        return type_coerce(cast(expr, DateTime(timezone=True)), UTCDateTime())
    return type_coerce(expr, UTCDateTime())


def _later(a: ColumnElement[Any], b: ColumnElement[Any]) -> ColumnElement[Any]:
    """max(a, b) for lower bounds where NULL means the beginning of time."""
    return type_coerce(case((or_(a.is_(None), b > a), b), else_=a), UTCDateTime())


def _earlier(a: ColumnElement[Any], b: ColumnElement[Any]) -> ColumnElement[Any]:
    """min(a, b) for upper bounds where NULL means no end."""
    return type_coerce(
        case((a.is_(None), b), (b.is_(None), a), (b < a, b), else_=a), UTCDateTime()
    )


def _path(expr: ColumnElement[Any]) -> ColumnElement[Any]:
    return cast(expr, Text)


def _lineage_cte(
    session: Session, item_id: int, until: datetime | None, timed: bool = True
) -> Any:
    """Recursive CTE of the item and its ancestors, each with the cut-off instant.

    Timed (for histories), a derivation recorded after the cut-off is not followed: what
    happened to a grandparent after the parent was cut cannot reach the child. Untimed, the
    plain graph of derivations is walked.
    """
    seed = select(
        literal(item_id, Integer).label("item_id"),
        _ts(session, until).label("cutoff"),
        literal(0, Integer).label("depth"),
        _path(literal(str(item_id))).label("path"),
    ).cte("lineage", recursive=True)
    up = select(
        Derivation.parent_id,
        _earlier(seed.c.cutoff, Derivation.derived_at),
        seed.c.depth + 1,
        _path(seed.c.path + ">" + cast(Derivation.parent_id, Text)),
    ).join(seed, Derivation.child_id == seed.c.item_id).where(seed.c.depth < MAX_LINEAGE_DEPTH)
    if timed:
        up = up.where(or_(seed.c.cutoff.is_(None), Derivation.derived_at <= seed.c.cutoff))
    return seed.union_all(up)


def _windows_cte(session: Session, lineage: Any) -> Any:
    """Recursive CTE of every subject whose events reach the item, with its time window."""
    seed = select(
        lineage.c.item_id.label("subject_id"),
        _ts(session, None).label("lo"),
        type_coerce(lineage.c.cutoff, UTCDateTime()).label("hi"),
        lineage.c.item_id.label("ancestor_id"),
        lineage.c.depth.label("ancestor_depth"),
        literal(0, Integer).label("nesting"),
        lineage.c.path.label("path"),
    ).cte("windows", recursive=True)
    p = Placement
    outward = select(
        p.container_id,
        _later(seed.c.lo, p.placed_at),
        _earlier(seed.c.hi, p.removed_at),
        seed.c.ancestor_id,
        seed.c.ancestor_depth,
        seed.c.nesting + 1,
        _path(seed.c.path + ">" + cast(p.container_id, Text)),
    ).join(seed, p.item_id == seed.c.subject_id).where(
        seed.c.nesting < MAX_NESTING_DEPTH,
        or_(seed.c.hi.is_(None), p.placed_at <= seed.c.hi),
        or_(seed.c.lo.is_(None), p.removed_at.is_(None), p.removed_at >= seed.c.lo),
    )
    return seed.union_all(outward)


def windows(session: Session, item_id: int, until: datetime | None = None) -> list[Window]:
    """Every ancestor and container whose events reach the item, with the window they apply in."""
    w = _windows_cte(session, _lineage_cte(session, item_id, until))
    rows = session.execute(select(w).order_by(w.c.ancestor_depth, w.c.nesting, w.c.subject_id))
    return [
        Window(r.subject_id, r.lo, r.hi, r.ancestor_id, r.ancestor_depth, r.nesting,
               tuple(int(x) for x in r.path.split(">")))
        for r in rows
    ]


def _reach(ancestor_depth: int, nesting: int) -> str:
    if ancestor_depth == 0:
        return OWN if nesting == 0 else CONTAINER
    return ANCESTOR if nesting == 0 else ANCESTOR_CONTAINER


def effective_history(
    session: Session, item_id: int, until: datetime | None = None
) -> list[HistoryEntry]:
    """The item's effective history up to `until` (default: all), oldest first."""
    w = _windows_cte(session, _lineage_cte(session, item_id, until))
    e = Event
    ends = func.coalesce(e.ended_at, e.occurred_at)
    rank = func.row_number().over(
        partition_by=e.id, order_by=(w.c.ancestor_depth, w.c.nesting, w.c.path)
    )
    reached = select(
        e.id.label("event_id"), w.c.ancestor_id, w.c.ancestor_depth, w.c.nesting,
        w.c.subject_id, w.c.path, rank.label("rank"),
    ).join(w, e.item_id == w.c.subject_id).where(
        or_(w.c.hi.is_(None), e.occurred_at <= w.c.hi),
        or_(w.c.lo.is_(None), ends >= w.c.lo),
    ).subquery("reached")
    stmt = (
        select(Event, reached)
        .join(reached, Event.id == reached.c.event_id)
        .where(reached.c.rank == 1)
        .order_by(Event.occurred_at, Event.id)
        .options(*_EVENT_PEOPLE_AND_PLACES)
    )
    entries = []
    for row in session.execute(stmt):
        depth, nesting = row.ancestor_depth, row.nesting
        entries.append(HistoryEntry(
            event=row.Event,
            reach=_reach(depth, nesting),
            ancestor_id=row.ancestor_id if depth > 0 else None,
            container_id=row.subject_id if nesting > 0 else None,
            path=tuple(int(x) for x in row.path.split(">")),
        ))
    return entries


def ancestors(session: Session, item_id: int) -> list[tuple[int, int, datetime | None]]:
    """(ancestor id, depth, instant the line was cut from it), nearest first; the whole graph."""
    lineage = _lineage_cte(session, item_id, None, timed=False)
    rows = session.execute(
        select(lineage.c.item_id, lineage.c.depth, lineage.c.cutoff)
        .where(lineage.c.depth > 0).order_by(lineage.c.depth, lineage.c.item_id)
    )
    return [(r.item_id, r.depth, r.cutoff) for r in rows]


def descendants(session: Session, item_ids: Sequence[int]) -> list[tuple[int, int, int]]:
    """(descendant id, parent id, depth) below the given items, one recursive query."""
    if not item_ids:
        return []
    seed = select(
        Item.id.label("item_id"), literal(0, Integer).label("parent_id"),
        literal(0, Integer).label("depth"),
    ).where(Item.id.in_(list(item_ids))).cte("descendants", recursive=True)
    down = select(Derivation.child_id, Derivation.parent_id, seed.c.depth + 1).join(
        seed, Derivation.parent_id == seed.c.item_id
    ).where(seed.c.depth < MAX_LINEAGE_DEPTH)
    tree = seed.union_all(down)
    rows = session.execute(
        select(tree.c.item_id, tree.c.parent_id, tree.c.depth).where(tree.c.depth > 0)
        .distinct().order_by(tree.c.depth, tree.c.item_id)
    )
    return [(r.item_id, r.parent_id, r.depth) for r in rows]


@dataclass(frozen=True)
class TreeNode:
    """One item of a lineage tree, with its parent in the tree (None at a root)."""

    item: Item
    parent_id: int | None
    depth: int


def lineage_tree(session: Session, item_id: int) -> list[TreeNode]:
    """The whole family of an item: its root particle(s) and every descendant, two queries."""
    lineage = _lineage_cte(session, item_id, None, timed=False)
    has_parent = select(Derivation.id).where(Derivation.child_id == lineage.c.item_id).exists()
    roots = [r for r in session.scalars(
        select(lineage.c.item_id).where(~has_parent).distinct())]
    below = descendants(session, roots)
    ids = set(roots) | {d for d, _, _ in below}
    items = {i.id: i for i in session.scalars(select(Item).where(Item.id.in_(ids)))}
    nodes = [TreeNode(items[r], None, 0) for r in sorted(roots)]
    seen: set[int] = set(roots)
    for child, parent, depth in below:
        if child not in seen:
            seen.add(child)
            nodes.append(TreeNode(items[child], parent, depth))
    return nodes


def containers_during(
    session: Session, item_id: int, start: datetime, end: datetime | None
) -> list[Window]:
    """Containers the item sat in (nested) for some time inside [start, end).

    Half-open, unlike the history windows: an item moved out at the instant another
    move begins does not count as still there.
    """
    found = []
    for win in windows(session, item_id):
        if win.ancestor_depth or not win.nesting_depth:
            continue
        if (win.end is None or win.end > start) and (end is None or win.start is None
                                                       or win.start < end):
            found.append(win)
    return found




def contents(
    session: Session, container_id: int, start: datetime | None, end: datetime | None
) -> list[Window]:
    """Everything that sat inside the container (nested) at some time within [start, end].

    The mirror of `windows`: each returned window is the time the item was inside, cut to
    [start, end]; `subject_id` is the item, `path` runs from the container down to it.
    """
    seed = select(
        literal(container_id, Integer).label("subject_id"),
        _ts(session, start).label("lo"),
        _ts(session, end).label("hi"),
        literal(0, Integer).label("nesting"),
        _path(literal(str(container_id))).label("path"),
    ).cte("contents", recursive=True)
    p = Placement
    inward = select(
        p.item_id,
        _later(seed.c.lo, p.placed_at),
        _earlier(seed.c.hi, p.removed_at),
        seed.c.nesting + 1,
        _path(seed.c.path + ">" + cast(p.item_id, Text)),
    ).join(seed, p.container_id == seed.c.subject_id).where(
        seed.c.nesting < MAX_NESTING_DEPTH,
        or_(seed.c.hi.is_(None), p.placed_at <= seed.c.hi),
        or_(seed.c.lo.is_(None), p.removed_at.is_(None), p.removed_at >= seed.c.lo),
    )
    tree = seed.union_all(inward)
    rows = session.execute(select(tree).where(tree.c.nesting > 0)
                           .order_by(tree.c.nesting, tree.c.subject_id))
    return [Window(r.subject_id, r.lo, r.hi, container_id, 0, r.nesting,
                   tuple(int(x) for x in r.path.split(">"))) for r in rows]
