"""Item pages: the list with search, the item page (timeline, lineage), the event page.

The read helpers below gather each page's data in a fixed number of queries, whatever the
size of the family: the history resolver answers in one statement, the rest are `IN` queries.
"""

from __future__ import annotations

import json
from collections import deque
from collections.abc import Mapping
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any, TypeVar

from flask import Blueprint, redirect, render_template, request, url_for
from markupsafe import Markup, escape
from sqlalchemy import func, or_, select
from sqlalchemy.orm import Session, joinedload, selectinload
from werkzeug.wrappers import Response

from curation import history
from curation.audit.engine import audit_item
from curation.errors import InvalidInput, NotFound
from curation.model import (
    CONTROL_KINDS, Derivation, Event, Item, ItemKind, Location, Person, Placement, Station,
)
from curation.reports import lineage_svg
from curation.services import images
from curation.services.common import item_by_code
from curation.services.events import CORRECTABLE
from curation.web.app import db_session
from curation.web.findings import FindingRow, finding_rows

bp = Blueprint("items", __name__)

#: items per page of the list
PAGE_SIZE = 50
#: longest search text accepted (codes are at most 64 characters)
MAX_SEARCH = 64
#: highest page number accepted (keeps the offset a small integer)
MAX_PAGE = 100_000
KINDS = [k.value for k in ItemKind]
#: most boxes the item page's lineage picture draws: a larger family is drawn around the
#: item, and whole in the lineage report (a thousand boxes cost more than the rest of the
#: page together, and no one reads a picture a hundred screens tall)
PICTURE_MAX = 100
#: a lineage tree's node: `history.FamilyLink` (ids only) or `history.TreeNode`
Node = TypeVar("Node", history.FamilyLink, history.TreeNode)
#: a shape for each status, so status never rests on colour alone
STATUS_MARKS = {"registered": "○", "stored": "■", "in-analysis": "▶", "consumed": "✕",
                "returned": "↩", "lost": "?"}


@bp.app_template_filter("when")
def when(value: datetime | None) -> str:
    """A timestamp as UTC to the second, or a dash."""
    return value.strftime("%Y-%m-%d %H:%M:%S UTC") if value else "—"


@bp.app_template_filter("qty")
def qty(value: float | None, uncertainty: float | None, unit: str, method: str | None) -> str:
    """A measured quantity with its standard uncertainty and method, or 'not measured'."""
    if value is None:
        return "not measured"
    text = f"{value:.4g}" + (f" ± {uncertainty:.2g}" if uncertainty is not None else "")
    return f"{text} {unit}" + (f" ({method})" if method else "")


@bp.app_context_processor
def _marks() -> dict[str, Any]:
    return {"STATUS_MARKS": STATUS_MARKS}


@bp.app_template_global()
def item_link_html(item: Item) -> Markup:
    """A link to an item's page, its kind and code: the one definition of the item link
    (the `item_link` macro of items/_marks.html wraps it; long lists call it directly)."""
    href = url_for("items.item_page", code=item.code)
    return Markup(f'<a class="item-link" href="{escape(href)}">'
                  f'{escape(item.kind)} <span class="code">{escape(item.code)}</span></a>')


# ---- the list -------------------------------------------------------------------------


@dataclass(frozen=True)
class ItemQuery:
    """What the list was asked for."""

    text: str = ""
    kind: str = ""
    page: int = 1

    @classmethod
    def from_args(cls, args: Mapping[str, str]) -> ItemQuery:
        """Parse ?q=, ?kind= and ?page=, refusing an unknown kind."""
        kind = args.get("kind", "").strip()
        if kind and kind not in KINDS:
            raise InvalidInput("kind", kind, "one of " + ", ".join(KINDS))
        try:
            page = min(max(1, int(args.get("page", "1"))), MAX_PAGE)
        except ValueError:
            page = 1
        # NUL never occurs in a code and PostgreSQL refuses it in a literal.
        text = args.get("q", "").replace("\x00", "").strip()[:MAX_SEARCH]
        return cls(text, kind, page)


@dataclass(frozen=True)
class ItemPage:
    """One page of the list, with the total so the page can say what it leaves out."""

    items: list[Item]
    total: int
    query: ItemQuery

    @property
    def first(self) -> int:
        return min(self.total, (self.query.page - 1) * PAGE_SIZE + 1)

    @property
    def last(self) -> int:
        return min(self.total, self.query.page * PAGE_SIZE)

    @property
    def has_next(self) -> bool:
        return self.last < self.total


def list_items(session: Session, query: ItemQuery) -> ItemPage:
    """Items whose code contains the text (any case), of the kind if given; two queries."""
    where = []
    if query.text:
        where.append(Item.code.icontains(query.text, autoescape=True))
    if query.kind:
        where.append(Item.kind == query.kind)
    total = session.scalar(select(func.count()).select_from(Item).where(*where)) or 0
    rows = session.scalars(
        select(Item).where(*where).order_by(Item.code)
        .offset((query.page - 1) * PAGE_SIZE).limit(PAGE_SIZE)
        .options(selectinload(Item.parents).joinedload(Derivation.parent))
    ).all()
    return ItemPage(list(rows), total, query)


# ---- the item page --------------------------------------------------------------------


@dataclass(frozen=True)
class TimelineRow:
    """One history entry with how it reached the item, in words, and its corrections."""

    entry: history.HistoryEntry
    #: ("from", ancestor), ("through", ancestor), ("via", container), ("in", container) ...
    reach: list[tuple[str, Item]]
    superseded_by: int | None = None
    #: for a correction: (field, before, after) for each field it changed
    changes: list[tuple[str, str, str]] = field(default_factory=list)

    @property
    def event(self) -> Event:
        return self.entry.event


@dataclass(frozen=True)
class ItemView:
    """Everything the item page shows."""

    item: Item
    #: (container, position) from the innermost outwards
    placement: list[tuple[Item, str]]
    parents: list[tuple[Derivation, Item]]
    children: list[tuple[Derivation, Item]]
    timeline: list[TimelineRow]
    #: the part of the family the lineage picture draws (`around`)
    tree: list[history.TreeNode]
    #: how many items the whole family holds
    family_size: int
    #: the audit's findings on the item, with their dispositions
    findings: list[FindingRow] = field(default_factory=list)
    #: event id → the findings it is evidence for, as (row number, finding row)
    evidence: dict[int, list[tuple[int, FindingRow]]] = field(default_factory=dict)


def item_view(session: Session, code: str) -> ItemView:
    """Gather the item page in a fixed number of queries."""
    item = item_by_code(session, code)
    family = history.family_links(session, item.id)
    tree = history.tree_of(session, around(family, item.id))
    known = {n.item.id: n.item for n in tree}
    links = session.scalars(select(Derivation).where(
        or_(Derivation.child_id == item.id, Derivation.parent_id == item.id))
        .order_by(Derivation.derived_at, Derivation.id)).all()
    entries = history.effective_history(session, item.id)
    chain, positions = placement_chain(session, item.id)
    ids = ({i for e in entries for i in e.path} | set(chain)
           | {i for d in links for i in (d.parent_id, d.child_id)})
    known.update(_items_by_id(session, ids - known.keys()))
    rows = finding_rows(session, audit_item(session, item, entries=entries))
    return ItemView(
        item=item,
        placement=[(known[c], positions.get(p, "")) for p, c in zip([item.id, *chain], chain)],
        parents=[(d, known[d.parent_id]) for d in links if d.child_id == item.id],
        children=[(d, known[d.child_id]) for d in links if d.parent_id == item.id],
        timeline=_timeline(session, entries, known),
        tree=tree,
        family_size=len(family),
        findings=rows,
        evidence=_evidence_marks(rows),
    )


def around(tree: list[Node], item_id: int, most: int | None = None) -> list[Node]:
    """The part of the family the item page draws: all of it up to `most` (PICTURE_MAX)
    items; else the roots, the item's line back to its root, what was cut from each item on
    that line (nearest the item first), then the item's descendants, nearest first."""
    most = PICTURE_MAX if most is None else most
    if len(tree) <= most:
        return tree
    by_id = {n.item_id: n for n in tree}
    children: dict[int | None, list[int]] = {}
    for n in tree:
        children.setdefault(n.parent_id, []).append(n.item_id)
    line: list[int] = []
    node = by_id.get(item_id)
    while node is not None and node.item_id not in line:
        line.append(node.item_id)
        node = by_id.get(node.parent_id) if node.parent_id is not None else None
    wanted = dict.fromkeys([*children.get(None, []), *reversed(line)])
    for line_id in line:
        wanted.update(dict.fromkeys(children.get(line_id, [])))
    below = deque(children.get(item_id, []))
    while below and len(wanted) < most:
        child = below.popleft()
        wanted[child] = None
        below.extend(children.get(child, []))
    # Every kept item's parent is kept too, so the picture stays one connected drawing.
    keep = set(list(wanted)[:max(most, len(line))])
    return [n for n in tree if n.item_id in keep]


def _evidence_marks(rows: list[FindingRow]) -> dict[int, list[tuple[int, FindingRow]]]:
    marks: dict[int, list[tuple[int, FindingRow]]] = {}
    for number, row in enumerate(rows, start=1):
        for event_id in row.finding.evidence if row.finding else ():
            marks.setdefault(event_id, []).append((number, row))
    return marks


def _items_by_id(session: Session, ids: set[int]) -> dict[int, Item]:
    # Always one query, even for no ids, so page cost does not depend on the data.
    return {i.id: i for i in session.scalars(select(Item).where(Item.id.in_(sorted(ids))))}


def placement_chain(session: Session, item_id: int) -> tuple[list[int], dict[int, str]]:
    """Containers the item sits in now (innermost first) and the position at each level."""
    # The resolver's windows already walk nested placements; an open chain has no end.
    open_chains = [w for w in history.windows(session, item_id)
                   if w.ancestor_depth == 0 and w.nesting_depth > 0 and w.end is None]
    deepest = max(open_chains, key=lambda w: w.nesting_depth, default=None)
    chain = list(deepest.path[1:]) if deepest else []
    placements = session.scalars(select(Placement).where(
        Placement.item_id.in_([item_id, *chain[:-1]]), Placement.removed_at.is_(None)))
    return chain, {p.item_id: p.position for p in placements}


def _timeline(
    session: Session, entries: list[history.HistoryEntry], known: dict[int, Item]
) -> list[TimelineRow]:
    by_id = {e.event.id: e.event for e in entries}
    later = {row.supersedes_id: row.id for row in session.execute(
        select(Event.supersedes_id, Event.id).where(Event.supersedes_id.in_(sorted(by_id))))}
    rows = []
    for entry in entries:
        original = by_id.get(entry.event.supersedes_id or -1)
        changes = correction_changes(original, entry.event) if original is not None else []
        rows.append(TimelineRow(entry, reach_words(entry, known), later.get(entry.event.id),
                                changes))
    return rows


def reach_words(entry: history.HistoryEntry, known: Mapping[int, Item]) -> list[tuple[str, Item]]:
    """How an inherited event reached the item, as (word, item) pairs; empty for its own."""
    if entry.reach == history.OWN:
        return []
    path = [known[i] for i in entry.path]
    if entry.ancestor_id is None:
        return [("via" if n == 1 else "in", c) for n, c in enumerate(path[1:], start=1)]
    cut = entry.path.index(entry.ancestor_id)
    words = [("from", path[cut])]
    words += [("through", a) for a in reversed(path[1:cut])]
    words += [("via" if n == 0 else "in", c) for n, c in enumerate(path[cut + 1:])]
    return words


def shown(value: Any) -> str:
    """A field value as words for a list of changes."""
    if value is None or value == "":
        return "—"
    if isinstance(value, datetime):
        return when(value)
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, Location | Station):
        return value.code
    if isinstance(value, Person):
        return value.username
    if isinstance(value, dict | list):
        return json.dumps(value, sort_keys=True, ensure_ascii=False)
    return str(value)


def correction_changes(original: Event, correction: Event) -> list[tuple[str, str, str]]:
    """(field, before, after) for each field a correction changed; the note always grows."""
    changes = []
    for name in CORRECTABLE:
        before, after = getattr(original, name), getattr(correction, name)
        if name != "note" and before != after:
            changes.append((name.replace("_", " "), shown(before), shown(after)))
    return changes


# ---- the event page -------------------------------------------------------------------


@dataclass(frozen=True)
class EventView:
    """Everything the event page shows."""

    event: Event
    supersedes: Event | None
    superseded_by: Event | None
    made: list[Derivation]


def event_view(session: Session, event_id: int) -> EventView:
    """An event with its people, places, corrections and the items it made."""
    event = session.scalar(select(Event).where(Event.id == event_id).options(
        selectinload(Event.actor), selectinload(Event.counterparty),
        selectinload(Event.station).selectinload(Station.instrument),
        selectinload(Event.location), selectinload(Event.item)))
    if event is None:
        raise NotFound(f"no event with id {event_id}")
    related = session.scalars(select(Event).where(or_(
        Event.id == event.supersedes_id, Event.supersedes_id == event.id))).all()
    made = session.scalars(select(Derivation).where(Derivation.step_id == event.id)
                           .options(joinedload(Derivation.child))
                           .order_by(Derivation.id)).all()
    return EventView(
        event=event,
        supersedes=next((e for e in related if e.id == event.supersedes_id), None),
        superseded_by=next((e for e in related if e.supersedes_id == event.id), None),
        made=list(made),
    )


# ---- views ----------------------------------------------------------------------------


@bp.get("/")
def home() -> Response:
    """The start page is the item list."""
    return redirect(url_for("items.item_list"))


@bp.get("/items")
def item_list() -> str:
    """Items, searched by code and filtered by kind, one page at a time."""
    query = ItemQuery.from_args(request.args)
    page = list_items(db_session(), query)
    return render_template("items/list.html", page=page, query=query, kinds=KINDS,
                           page_size=PAGE_SIZE)


@bp.get("/items/<code>")
def item_page(code: str) -> str:
    """One item: identity, where it is, family, effective timeline and lineage picture."""
    view = item_view(db_session(), code)
    picture = lineage_svg.render(
        view.tree, current_id=view.item.id, label=f"Lineage of {view.item.code}",
        href=lambda i: url_for("items.item_page", code=i.code))
    return render_template("items/item.html", v=view, picture=Markup(picture),
                           files=images.files_with_images(db_session(), view.item.id),
                           control_kinds={k.value for k in CONTROL_KINDS})


@bp.get("/events/<int:event_id>")
def event_page(event_id: int) -> str:
    """One event with every field."""
    view = event_view(db_session(), event_id)
    return render_template("events/event.html", v=view, shown=shown)
