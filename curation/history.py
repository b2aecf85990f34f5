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

from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlalchemy import (
    Integer, Row, Select, Text, bindparam, case, cast, func, literal, null, or_, select,
    type_coerce,
)
from sqlalchemy.orm import Session
from sqlalchemy.orm.attributes import set_committed_value
from sqlalchemy.sql.expression import ColumnElement
from sqlalchemy.types import DateTime

from curation.db import UTCDateTime
from curation.model import Derivation, Event, Item, Location, Person, Placement, Station

#: recursion guards: far deeper than any real lineage or nesting of containers
MAX_LINEAGE_DEPTH = 64
MAX_NESTING_DEPTH = 32
#: ids bound per IN list (`in_chunks`): below SQLite's 32,766 and PostgreSQL's 65,535 parameters per
#: statement, and far above the events of one family, so a page or report issues the same
#: statements for a small family and a large one
EVENT_CHUNK = 30_000

OWN, CONTAINER, ANCESTOR, ANCESTOR_CONTAINER = "own", "container", "ancestor", "ancestor-container"

#: what every reader of a history shows beside an event, loaded by `_attach_people_and_places`
#: with one IN query per kind (measured no slower than joining them into the events' query
#: for one needle, and faster for a batch, where a wide joined row per event costs more)
#: relationship -> (foreign key attribute, target class)
_PEOPLE_AND_PLACES = {"actor": ("actor_id", Person), "counterparty": ("counterparty_id", Person),
                      "station": ("station_id", Station), "location": ("location_id", Location),
                      "item": ("item_id", Item)}


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


def _ts_param(dialect: str, name: str | None) -> ColumnElement[Any]:
    """A typed timestamp parameter, or NULL (PostgreSQL needs the type inside a recursive
    CTE)."""
    expr = bindparam(name, type_=UTCDateTime()) if name else null()
    if dialect == "postgresql":
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


def _lineage_cte(dialect: str, timed: bool = True) -> Any:
    """Recursive CTE of the items named by the `ids` parameter and their ancestors.

    Each row carries its `origin` (the item asked about) and the cut-off instant: the
    `until` parameter at the origin, then the instant each line was cut. Timed (for
    histories), a derivation recorded after the cut-off is not followed: what happened to a
    grandparent after the parent was cut cannot reach the child. Untimed, the plain graph of
    derivations is walked.
    """
    seed = select(
        Item.id.label("origin"),
        Item.id.label("item_id"),
        _ts_param(dialect, "until").label("cutoff"),
        literal(0, Integer).label("depth"),
        _path(Item.id).label("path"),
    ).where(Item.id.in_(bindparam("ids", expanding=True))).cte("lineage", recursive=True)
    up = select(
        seed.c.origin,
        Derivation.parent_id,
        _earlier(seed.c.cutoff, Derivation.derived_at),
        seed.c.depth + 1,
        _path(seed.c.path + ">" + cast(Derivation.parent_id, Text)),
    ).join(seed, Derivation.child_id == seed.c.item_id).where(seed.c.depth < MAX_LINEAGE_DEPTH)
    if timed:
        up = up.where(or_(seed.c.cutoff.is_(None), Derivation.derived_at <= seed.c.cutoff))
    return seed.union_all(up)


def _windows_cte(dialect: str, lineage: Any) -> Any:
    """Recursive CTE of every subject whose events reach each origin, with its time window."""
    seed = select(
        lineage.c.origin,
        lineage.c.item_id.label("subject_id"),
        _ts_param(dialect, None).label("lo"),
        type_coerce(lineage.c.cutoff, UTCDateTime()).label("hi"),
        lineage.c.item_id.label("ancestor_id"),
        lineage.c.depth.label("ancestor_depth"),
        literal(0, Integer).label("nesting"),
        lineage.c.path.label("path"),
    ).cte("windows", recursive=True)
    p = Placement
    outward = select(
        seed.c.origin,
        p.container_id,
        _later(seed.c.lo, p.placed_at),
        _earlier(seed.c.hi, p.removed_at),
        seed.c.ancestor_id,
        seed.c.ancestor_depth,
        seed.c.nesting + 1,
        _path(seed.c.path + ">" + cast(p.container_id, Text)),
    ).join(seed, p.item_id == seed.c.subject_id).where(
        seed.c.nesting < MAX_NESTING_DEPTH, *_overlapping(seed))
    return seed.union_all(outward)


def _overlapping(seed: Any) -> tuple[ColumnElement[bool], ColumnElement[bool]]:
    """Placements that overlap the seed row's closed window [lo, hi] (NULL: unbounded)."""
    p = Placement
    return (or_(seed.c.hi.is_(None), p.placed_at <= seed.c.hi),
            or_(seed.c.lo.is_(None), p.removed_at.is_(None), p.removed_at >= seed.c.lo))


#: built statements by (question, dialect); they take `ids` (expanding) and `until` parameters,
#: so each is built and compiled once per process, not on every call
_STATEMENTS: dict[tuple[str, str], Any] = {}


def _statement(session: Session, question: str) -> Any:
    dialect = session.get_bind().dialect.name
    key = (question, dialect)
    if key not in _STATEMENTS:
        _STATEMENTS[key] = _BUILDERS[question](dialect)
    return _STATEMENTS[key]


def _ask(session: Session, question: str, params: dict[str, Any]) -> list[Row[Any]]:
    """Rows of one built statement, through Core on the session's connection (the rows are
    plain values, so the ORM's execution layer would only add time)."""
    return session.connection().execute(_statement(session, question), params).all()


def _windows_statement(dialect: str) -> Any:
    w = _windows_cte(dialect, _lineage_cte(dialect))
    return select(w).order_by(w.c.origin, w.c.ancestor_depth, w.c.nesting, w.c.subject_id)


def _resolver_statement(dialect: str) -> Any:
    w = _windows_cte(dialect, _lineage_cte(dialect))
    e = Event.__table__.c
    ends = func.coalesce(e.ended_at, e.occurred_at)
    rank = func.row_number().over(
        partition_by=(w.c.origin, e.id), order_by=(w.c.ancestor_depth, w.c.nesting, w.c.path)
    )
    reached = select(
        w.c.origin, e.id.label("event_id"), e.occurred_at, w.c.ancestor_id, w.c.ancestor_depth,
        w.c.nesting, w.c.subject_id, w.c.path, rank.label("rank"),
    ).join(w, e.item_id == w.c.subject_id).where(
        or_(w.c.hi.is_(None), e.occurred_at <= w.c.hi),
        or_(w.c.lo.is_(None), ends >= w.c.lo),
    ).subquery("reached")
    r = reached.c
    return (select(r.origin, r.event_id, r.ancestor_id, r.ancestor_depth, r.nesting,
                   r.subject_id, r.path)
            .where(r.rank == 1).order_by(r.origin, r.occurred_at, r.event_id))


def _ancestors_statement(dialect: str) -> Any:
    lineage = _lineage_cte(dialect, timed=False)
    return (select(lineage.c.origin, lineage.c.item_id, lineage.c.depth, lineage.c.cutoff)
            .where(lineage.c.depth > 0)
            .order_by(lineage.c.origin, lineage.c.depth, lineage.c.item_id))


def _descendants_statement(dialect: str) -> Any:
    seed = select(
        Item.id.label("item_id"), literal(0, Integer).label("parent_id"),
        literal(0, Integer).label("depth"),
    ).where(Item.id.in_(bindparam("ids", expanding=True))).cte("descendants", recursive=True)
    down = select(Derivation.child_id, Derivation.parent_id, seed.c.depth + 1).join(
        seed, Derivation.parent_id == seed.c.item_id
    ).where(seed.c.depth < MAX_LINEAGE_DEPTH)
    tree = seed.union_all(down)
    return (select(tree.c.item_id, tree.c.parent_id, tree.c.depth).where(tree.c.depth > 0)
            .distinct().order_by(tree.c.depth, tree.c.item_id))


def _roots_statement(dialect: str) -> Any:
    lineage = _lineage_cte(dialect, timed=False)
    has_parent = select(Derivation.id).where(Derivation.child_id == lineage.c.item_id).exists()
    return select(lineage.c.item_id).where(~has_parent).distinct()


def _split(path: str) -> tuple[int, ...]:
    return tuple(int(x) for x in path.split(">"))


def windows(session: Session, item_id: int, until: datetime | None = None) -> list[Window]:
    """Every ancestor and container whose events reach the item, with the window they apply in."""
    rows = _ask(session, "windows", {"ids": [item_id], "until": until})
    return [Window(r.subject_id, r.lo, r.hi, r.ancestor_id, r.ancestor_depth, r.nesting,
                   _split(r.path)) for r in rows]


def _reach(ancestor_depth: int, nesting: int) -> str:
    if ancestor_depth == 0:
        return OWN if nesting == 0 else CONTAINER
    return ANCESTOR if nesting == 0 else ANCESTOR_CONTAINER


def resolve(session: Session, item_ids: Sequence[int], until: datetime | None = None
            ) -> list[Row[Any]]:
    """The resolver itself: which events reach each item, and how; one recursive statement.

    Rows (origin, event_id, ancestor_id, ancestor_depth, nesting, subject_id, path), by
    origin then oldest first; `origin` is the item asked about, `subject_id` the item or
    container the event was recorded on.
    """
    return _ask(session, "resolve", {"ids": list(item_ids), "until": until})


def effective_histories(session: Session, item_ids: Sequence[int],
                        until: datetime | None = None) -> dict[int, list[HistoryEntry]]:
    """The effective history of each item up to `until` (default: all), oldest first.

    A fixed number of statements whatever the number of items: the resolver, the events it
    named (an event shared by many items, such as a particle's, is loaded once), and their
    people and places.
    """
    reached = resolve(session, item_ids, until)
    events = {e.id: e for e in _by_id(session, Event, {r.event_id for r in reached})}
    _attach_people_and_places(session, list(events.values()))
    found: dict[int, list[HistoryEntry]] = {i: [] for i in item_ids}
    for r in reached:
        depth, nesting = r.ancestor_depth, r.nesting
        found[r.origin].append(HistoryEntry(
            event=events[r.event_id],
            reach=_reach(depth, nesting),
            ancestor_id=r.ancestor_id if depth > 0 else None,
            container_id=r.subject_id if nesting > 0 else None,
            path=_split(r.path),
        ))
    return found


def in_chunks(session: Session, query: Callable[[list[int]], Select[Any]],
              ids: Iterable[int]) -> list[Any]:
    """The scalars of `query(chunk)` over the ids, `EVENT_CHUNK` ids per statement: one
    statement at least (even for none), so callers issue a fixed number of statements."""
    wanted = sorted(ids)
    return [value for start in range(0, max(len(wanted), 1), EVENT_CHUNK)
            for value in session.scalars(query(wanted[start:start + EVENT_CHUNK]))]


def _by_id(session: Session, cls: Any, ids: Iterable[int]) -> list[Any]:
    """The rows of `cls` with these ids (see `in_chunks`)."""
    return in_chunks(session, lambda chunk: select(cls).where(cls.id.in_(chunk)), ids)


def _attach_people_and_places(session: Session, events: list[Event]) -> None:
    """Load the events' people, stations, locations and items, one IN query per kind (a
    fixed number, unlike `selectinload`, which splits its IN lists into chunks of 500)."""
    wanted: dict[type, set[int]] = {}
    for key, cls in _PEOPLE_AND_PLACES.values():
        wanted.setdefault(cls, set()).update(
            v for e in events if (v := getattr(e, key)) is not None)
    found = {cls: {o.id: o for o in _by_id(session, cls, ids)} for cls, ids in wanted.items()}
    for name, (key, cls) in _PEOPLE_AND_PLACES.items():
        for e in events:
            ref = getattr(e, key)
            set_committed_value(e, name, None if ref is None else found[cls][ref])


def effective_history(
    session: Session, item_id: int, until: datetime | None = None
) -> list[HistoryEntry]:
    """The item's effective history up to `until` (default: all), oldest first."""
    return effective_histories(session, [item_id], until)[item_id]


def ancestors_of(session: Session, item_ids: Sequence[int]
                 ) -> dict[int, list[tuple[int, int, datetime | None]]]:
    """For each item, (ancestor id, depth, instant the line was cut from it), nearest first."""
    found: dict[int, list[tuple[int, int, datetime | None]]] = {i: [] for i in item_ids}
    for r in _ask(session, "ancestors", {"ids": list(item_ids), "until": None}):
        found[r.origin].append((r.item_id, r.depth, r.cutoff))
    return found


def ancestors(session: Session, item_id: int) -> list[tuple[int, int, datetime | None]]:
    """(ancestor id, depth, instant the line was cut from it), nearest first; the whole graph."""
    return ancestors_of(session, [item_id])[item_id]


def descendants(session: Session, item_ids: Sequence[int]) -> list[tuple[int, int, int]]:
    """(descendant id, parent id, depth) below the given items, one recursive query."""
    return [tuple(r) for r in _ask(session, "descendants", {"ids": list(item_ids)})]


@dataclass(frozen=True)
class FamilyLink:
    """One item of a family, by id only, with its parent in the tree (None at a root)."""

    item_id: int
    parent_id: int | None
    depth: int


@dataclass(frozen=True)
class TreeNode:
    """One item of a lineage tree, with its parent in the tree (None at a root)."""

    item: Item
    parent_id: int | None
    depth: int

    @property
    def item_id(self) -> int:
        return self.item.id


def family_links(session: Session, item_id: int) -> list[FamilyLink]:
    """The shape of an item's whole family: its root particle(s) first, then every
    descendant once, by depth (two queries, no item loaded)."""
    roots = sorted(r[0] for r in _ask(session, "roots", {"ids": [item_id], "until": None}))
    links = [FamilyLink(r, None, 0) for r in roots]
    seen: set[int] = set(roots)
    for child, parent, depth in descendants(session, roots):
        if child not in seen:
            seen.add(child)
            links.append(FamilyLink(child, parent, depth))
    return links


def tree_of(session: Session, links: list[FamilyLink]) -> list[TreeNode]:
    """The links with their items loaded, one query."""
    items = {i.id: i for i in session.scalars(
        select(Item).where(Item.id.in_([link.item_id for link in links])))}
    return [TreeNode(items[link.item_id], link.parent_id, link.depth) for link in links]


def lineage_tree(session: Session, item_id: int) -> list[TreeNode]:
    """The whole family of an item: its root particle(s) and every descendant, three queries."""
    return tree_of(session, family_links(session, item_id))


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




def _contents_statement(dialect: str) -> Any:
    container = bindparam("container", type_=Integer)
    seed = select(
        container.label("subject_id"),
        _ts_param(dialect, "lo").label("lo"),
        _ts_param(dialect, "hi").label("hi"),
        literal(0, Integer).label("nesting"),
        _path(container).label("path"),
    ).cte("contents", recursive=True)
    p = Placement
    inward = select(
        p.item_id,
        _later(seed.c.lo, p.placed_at),
        _earlier(seed.c.hi, p.removed_at),
        seed.c.nesting + 1,
        _path(seed.c.path + ">" + cast(p.item_id, Text)),
    ).join(seed, p.container_id == seed.c.subject_id).where(
        seed.c.nesting < MAX_NESTING_DEPTH, *_overlapping(seed))
    tree = seed.union_all(inward)
    return select(tree).where(tree.c.nesting > 0).order_by(tree.c.nesting, tree.c.subject_id)


def contents(
    session: Session, container_id: int, start: datetime | None, end: datetime | None
) -> list[Window]:
    """Everything that sat inside the container (nested) at some time within [start, end].

    The mirror of `windows`: each returned window is the time the item was inside, cut to
    [start, end]; `subject_id` is the item, `path` runs from the container down to it.
    """
    rows = _ask(session, "contents", {"container": container_id, "lo": start, "hi": end})
    return [Window(r.subject_id, r.lo, r.hi, container_id, 0, r.nesting, _split(r.path))
            for r in rows]


#: how each question's statement is built (see `_statement`)
_BUILDERS = {"windows": _windows_statement, "resolve": _resolver_statement,
             "ancestors": _ancestors_statement, "descendants": _descendants_statement,
             "roots": _roots_statement, "contents": _contents_statement}
