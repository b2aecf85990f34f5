"""Allocation accounting and its findings.

For each issued item, over its lineage (everything cut from it):

    issued = consumed + remaining + transferred + returned + lost      (µg)

Each family item's own mass budget (`audit.mass`) says how much of it went into its children,
was milled away, was consumed by analysis or remains; what remains is then placed by the
item's fate: returned (an `AllocationReturn` row), transferred (issued under a sub-allocation:
its whole mass, not followed further), lost (a `declared-lost` event or status), or remaining,
which must be backed by where it is (an open placement in a container, else its last custody
event). Every part names its evidence. The identity holds within k combined standard
uncertainties (k = `Thresholds.mass_coverage_factor`); a part with no record of where it is
makes the allocation unbalanced whatever its mass, because no weighing uncertainty excuses a
needle nobody can find.

Allocation-level findings need an item (a disposition names one): an overdue report is raised
on the allocation's first issued item, naming the allocation and every overdue period; an
overdue return on each remaining item; use outside the allocation on the item the step touched.
Everything is loaded in a fixed number of queries (`load`), then computed without the database.
"""

from __future__ import annotations

import math
from collections import defaultdict
from dataclasses import dataclass, field
from datetime import datetime

from sqlalchemy import select
from sqlalchemy.orm import Session, joinedload, selectinload

from curation import history
from curation.audit.findings import ERROR, WARNING, Finding, Thresholds
from curation.audit.mass import Mass, MassBudget, mass_budget
from curation.model import (
    Allocation,
    AllocationItem,
    AllocationMember,
    AllocationReport,
    AllocationReturn,
    Derivation,
    Event,
    Item,
    Placement,
)

TERMS = ("consumed", "remaining", "transferred", "returned", "lost")
UNACCOUNTED = "unaccounted"
ALLOCATION_CODES = ("allocation-unbalanced", "report-overdue", "return-overdue",
                    "used-outside-allocation")


@dataclass
class Loaded:
    """Allocations with their issued items' families, as rows (fixed number of queries)."""

    allocations: dict[int, Allocation]
    issued: list[AllocationItem]
    items: dict[int, Item] = field(default_factory=dict)
    parent_of: dict[int, int] = field(default_factory=dict)
    children: dict[int, list[tuple[Derivation, Item]]] = field(default_factory=dict)
    #: own events by item, corrections applied, oldest first
    events: dict[int, list[Event]] = field(default_factory=dict)
    superseded: set[int] = field(default_factory=set)
    placements: dict[int, Placement] = field(default_factory=dict)
    returns: dict[tuple[int, int], AllocationReturn] = field(default_factory=dict)
    members: dict[int, set[int]] = field(default_factory=dict)
    reports: dict[int, list[AllocationReport]] = field(default_factory=dict)

    def family(self, root_id: int) -> list[int]:
        """The issued item and everything cut from it, parents before children."""
        out, stack = [], [root_id]
        while stack:
            i = stack.pop()
            out.append(i)
            stack.extend(reversed([c.id for _, c in self.children.get(i, [])]))
        return out

    def transfers(self, allocation_id: int) -> dict[int, AllocationItem]:
        """Items issued under sub-allocations of the allocation, by item id."""
        return {a.item_id: a for a in self.issued
                if self.allocations[a.allocation_id].parent_id == allocation_id}

    def allowed(self, allocation_id: int) -> set[int]:
        """People who may work on the allocation's items: its tree's members and investigators."""
        root = allocation_id
        while self.allocations[root].parent_id is not None:
            root = self.allocations[root].parent_id or root
        tree = {root}
        while grown := {a.id for a in self.allocations.values() if a.parent_id in tree} - tree:
            tree |= grown
        return {p for a in tree for p in self.members.get(a, set())}


def load(session: Session, allocation_ids: list[int] | None = None) -> Loaded:
    """The allocations (all, or these and their whole tree) and their families' rows."""
    everything = {a.id: a for a in session.scalars(
        select(Allocation).options(joinedload(Allocation.investigator)).order_by(Allocation.id))}
    wanted = set(everything) if allocation_ids is None else _tree(everything, allocation_ids)
    data = Loaded({i: everything[i] for i in sorted(wanted)}, list(session.scalars(
        select(AllocationItem).where(AllocationItem.allocation_id.in_(wanted))
        .options(joinedload(AllocationItem.item))
        .order_by(AllocationItem.issued_at, AllocationItem.id))))
    roots = sorted({a.item_id for a in data.issued})
    below = history.descendants(session, roots)
    ids = sorted(set(roots) | {d for d, _, _ in below})
    data.parent_of = {d: p for d, p, _ in below}
    # every query runs even when there is nothing to load: a fixed number of statements
    data.items = {i.id: i for i in session.scalars(select(Item).where(Item.id.in_(ids)))}
    _load_family(session, data, ids)
    _load_allocation_rows(session, data, sorted(wanted))
    return data


def _tree(everything: dict[int, Allocation], ids: list[int]) -> set[int]:
    """The allocations, the ones they were carved from, and everything carved from those."""
    wanted = set(ids)
    while up := {everything[i].parent_id for i in wanted} - wanted - {None}:
        wanted |= {i for i in up if i is not None}
    while grown := {a.id for a in everything.values() if a.parent_id in wanted} - wanted:
        wanted |= grown
    return wanted


def _load_family(session: Session, data: Loaded, ids: list[int]) -> None:
    children: dict[int, list[tuple[Derivation, Item]]] = defaultdict(list)
    for d in session.scalars(select(Derivation).where(Derivation.parent_id.in_(ids))
                             .order_by(Derivation.derived_at, Derivation.id)):
        if d.child_id in data.items:
            children[d.parent_id].append((d, data.items[d.child_id]))
    data.children = dict(children)
    events = list(session.scalars(
        select(Event).where(Event.item_id.in_(ids)).order_by(Event.occurred_at, Event.id)
        .options(selectinload(Event.actor), selectinload(Event.location))))
    data.superseded = {e.supersedes_id for e in events if e.supersedes_id is not None}
    own: dict[int, list[Event]] = defaultdict(list)
    for e in events:
        if e.id not in data.superseded:
            own[e.item_id].append(e)
    data.events = dict(own)
    data.placements = {p.item_id: p for p in session.scalars(
        select(Placement).where(Placement.item_id.in_(ids), Placement.removed_at.is_(None))
        .options(joinedload(Placement.container)))}


def _load_allocation_rows(session: Session, data: Loaded, wanted: list[int]) -> None:
    members: dict[int, set[int]] = defaultdict(set)
    for a in data.allocations.values():
        members[a.id].add(a.investigator_id)
    reports: dict[int, list[AllocationReport]] = defaultdict(list)
    for m in session.scalars(select(AllocationMember).where(
            AllocationMember.allocation_id.in_(wanted))):
        members[m.allocation_id].add(m.person_id)
    data.returns = {(r.allocation_id, r.item_id): r for r in session.scalars(
        select(AllocationReturn).where(AllocationReturn.allocation_id.in_(wanted)))}
    for r in session.scalars(select(AllocationReport).where(
            AllocationReport.allocation_id.in_(wanted)).order_by(AllocationReport.due_at)):
        reports[r.allocation_id].append(r)
    data.members, data.reports = dict(members), dict(reports)


# ---- the accounting -------------------------------------------------------------------


@dataclass(frozen=True)
class Part:
    """One term's share from one item, with what backs it."""

    term: str
    item: Item
    ug: float
    u_ug: float
    #: event ids that back it
    evidence: tuple[int, ...]
    #: rows that back it, in words (a placement, a return, a sub-allocation)
    note: str


@dataclass
class Account:
    """The accounting of one issued item over its lineage."""

    link: AllocationItem
    issued: Mass
    parts: list[Part]
    budgets: dict[int, MassBudget]
    k: float

    def total(self, term: str) -> float:
        """The sum of one term, µg (math.fsum: exact rounding of the float sum)."""
        return math.fsum(p.ug for p in self.parts if p.term == term)

    @property
    def accounted_ug(self) -> float:
        return math.fsum(p.ug for p in self.parts if p.term in TERMS)

    @property
    def discrepancy_ug(self) -> float:
        """issued minus the five terms, µg."""
        return self.issued.ug - self.accounted_ug

    @property
    def u_ug(self) -> float:
        """Combined standard uncertainty of the discrepancy, µg."""
        return math.sqrt(math.fsum([self.issued.u_ug**2, *(p.u_ug**2 for p in self.parts)]))

    @property
    def unaccounted(self) -> list[Part]:
        return [p for p in self.parts if p.term == UNACCOUNTED]

    @property
    def is_balanced(self) -> bool:
        return not self.unaccounted and abs(self.discrepancy_ug) <= self.k * self.u_ug


def _lost_event(events: list[Event], item: Item) -> Event | None:
    lost = [e for e in events if e.action == "declared-lost"]
    return lost[0] if lost else None


def whereabouts(data: Loaded, item_id: int) -> tuple[str, tuple[int, ...]] | None:
    """Where the item is, in words, with the event that says so; None when nothing does."""
    held = data.placements.get(item_id)
    if held is not None:
        return f"in {held.container.code} {held.position}".strip(), ()
    custody = [e for e in data.events.get(item_id, []) if e.kind == "custody"]
    if custody:
        last = custody[-1]
        place = last.location.name if last.location is not None else "no place named"
        return f"{last.action} at {place}", (last.id,)
    return None


def _fate(data: Loaded, allocation_id: int, item: Item, b: MassBudget) -> list[Part]:
    """Where this item's own share went (not its children's)."""
    events = data.events.get(item.id, [])
    ids = tuple(e.id for e in b.evidence)
    rest = b.remaining.ug if b.remaining is not None else 0.0
    spent = Mass(b.milled.ug + b.consumed.ug, math.hypot(b.milled.u_ug, b.consumed.u_ug), "")
    lost = _lost_event(events, item)
    if lost is not None or item.status == "lost":
        return [Part("consumed", item, b.milled.ug, b.milled.u_ug, ids, "milled away"),
                Part("lost", item, b.consumed.ug + rest, 0.0, (lost.id,) if lost else (),
                     "declared lost" if lost else "status lost (no event)")]
    parts = [Part("consumed", item, spent.ug, spent.u_ug, ids, "milled away or used up")]
    returned = data.returns.get((allocation_id, item.id))
    if returned is not None:
        mass = returned.mass_ug if returned.mass_ug is not None else rest
        parts.append(Part("returned", item, mass, 0.0,
                          (returned.event_id,) if returned.event_id else (),
                          f"returned {returned.returned_at:%Y-%m-%d}"
                          + (f" ({returned.condition})" if returned.condition else "")))
    elif rest > 0:
        where = whereabouts(data, item.id)
        u = b.remaining.u_ug if b.remaining is not None else 0.0
        parts.append(Part("remaining", item, rest, u, where[1], where[0]) if where else
                     Part(UNACCOUNTED, item, rest, u, (), "no record of where it is"))
    return parts


def account(data: Loaded, link: AllocationItem, k: float = Thresholds().mass_coverage_factor
            ) -> Account:
    """The accounting of one issued item over its lineage."""
    transfers = data.transfers(link.allocation_id)
    root = data.items[link.item_id]
    parts: list[Part] = []
    budgets: dict[int, MassBudget] = {}
    stack = [link.item_id]
    while stack:
        item = data.items[stack.pop()]
        b = mass_budget(item, data.children.get(item.id, []), data.events.get(item.id, []))
        budgets[item.id] = b
        moved = transfers.get(item.id)
        if moved is not None:
            sub = data.allocations[moved.allocation_id]
            parts.append(Part("transferred", item, b.initial.ug if b.initial else 0.0,
                              b.initial.u_ug if b.initial else 0.0, _sent(data, item.id),
                              f"issued under {sub.reference} ({sub.laboratory or 'another lab'})"))
            continue
        parts += _fate(data, link.allocation_id, item, b)
        stack.extend(c.id for _, c in data.children.get(item.id, []))
    first = budgets[root.id].initial
    issued = (Mass(link.allocated_mass_ug, root.mass_uncertainty_ug or 0.0, "allocated")
              if link.allocated_mass_ug is not None else first or Mass(0.0, 0.0, "unknown"))
    return Account(link, issued, [p for p in parts if p.ug or p.term == UNACCOUNTED], budgets, k)


def _sent(data: Loaded, item_id: int) -> tuple[int, ...]:
    return tuple(e.id for e in data.events.get(item_id, [])
                 if e.kind == "custody" and e.action in ("release", "shipped"))


def accounts(data: Loaded, allocation_id: int) -> list[Account]:
    """The accounting of every item issued under one allocation."""
    return [account(data, link) for link in data.issued if link.allocation_id == allocation_id]


# ---- the findings ---------------------------------------------------------------------


def _finding(code: str, severity: str, item: Item, message: str, evidence: tuple[int, ...],
             at: datetime | None) -> Finding:
    return Finding(code, severity, item.id, item.code, message, tuple(e for e in evidence if e),
                   at)


def allocation_unbalanced(data: Loaded, acc: Account) -> list[Finding]:
    """Parts with no record of where they are; a measured discrepancy beyond k·u."""
    ref = data.allocations[acc.link.allocation_id].reference
    root = acc.link.item
    found = [_finding(
        "allocation-unbalanced", ERROR, p.item,
        f"{p.item.code} ({p.ug:.3g} µg of {root.code}, issued under {ref}) has no record of "
        f"where it is: no consumption, loss, return or transfer, and no container or custody "
        f"event places it", _last(data, p.item.id), None) for p in acc.unaccounted]
    if abs(acc.discrepancy_ug) > acc.k * acc.u_ug:
        terms = ", ".join(f"{t} {acc.total(t):.4g}" for t in TERMS)
        found.append(_finding(
            "allocation-unbalanced", ERROR, root,
            f"{root.code} under {ref}: issued {acc.issued.ug:.4g} µg but {terms} µg add up to "
            f"{acc.accounted_ug:.4g} µg ({acc.discrepancy_ug:+.3g} µg, more than {acc.k:g} × "
            f"{acc.u_ug:.2g} µg)", tuple(e for p in acc.parts for e in p.evidence), None))
    return found


def _last(data: Loaded, item_id: int) -> tuple[int, ...]:
    own = data.events.get(item_id, [])
    return (own[-1].id,) if own else ()


def report_overdue(data: Loaded, allocation: Allocation, now: datetime) -> list[Finding]:
    """Reports past their due date and not submitted, on the allocation's first issued item."""
    anchor = next((a.item for a in data.issued if a.allocation_id == allocation.id), None)
    rows = data.reports.get(allocation.id, [])
    late = [f"{r.period_start:%Y-%m-%d}–{r.period_end:%Y-%m-%d} (due {r.due_at:%Y-%m-%d})"
            for r in rows if r.submitted_at is None and r.due_at < now]
    due = allocation.report_due_at
    if due is not None and due < now and not any(r.submitted_at for r in rows):
        late.append(f"the allocation's report (due {due:%Y-%m-%d})")
    if anchor is None or not late:
        return []
    return [_finding("report-overdue", WARNING, anchor,
                     f"{allocation.reference}: report overdue for " + "; ".join(late), (), None)]


def return_overdue(data: Loaded, allocation: Allocation, accs: list[Account],
                   now: datetime) -> list[Finding]:
    """Items still held after the allocation expired; returns made after their due date."""
    found = []
    if allocation.expires_at is not None and allocation.expires_at < now:
        found += [_finding("return-overdue", ERROR, p.item,
                           f"{p.item.code} is still held ({p.note}) though {allocation.reference}"
                           f" expired on {allocation.expires_at:%Y-%m-%d}", p.evidence, None)
                  for acc in accs for p in acc.parts if p.term in ("remaining", UNACCOUNTED)]
    for (alloc_id, item_id), r in sorted(data.returns.items()):
        if alloc_id == allocation.id and r.due_at is not None and r.returned_at > r.due_at:
            found.append(_finding(
                "return-overdue", WARNING, data.items[item_id],
                f"{data.items[item_id].code} was returned on {r.returned_at:%Y-%m-%d}, after "
                f"the facility's date {r.due_at:%Y-%m-%d}", (r.event_id or 0,), r.returned_at))
    return found


def used_outside_allocation(data: Loaded, acc: Account) -> list[Finding]:
    """A step on an issued item or its descendants by someone the allocation does not name."""
    allowed = data.allowed(acc.link.allocation_id)
    ref = data.allocations[acc.link.allocation_id].reference
    found = []
    for item_id in acc.budgets:
        back = data.returns.get((acc.link.allocation_id, item_id))
        for ev in data.events.get(item_id, []):
            if ev.kind != "step" or ev.occurred_at < acc.link.issued_at \
                    or ev.actor_id in allowed or (back and ev.occurred_at > back.returned_at):
                continue
            found.append(_finding(
                "used-outside-allocation", ERROR, data.items[item_id],
                f"{ev.actor.name} ({ev.actor.username}) ran {ev.technique} on "
                f"{data.items[item_id].code} but is not named on {ref} or its transfers",
                (ev.id,), ev.occurred_at))
    return found


def findings(data: Loaded, now: datetime) -> list[Finding]:
    """Every allocation finding over the loaded allocations."""
    found: list[Finding] = []
    for allocation in data.allocations.values():
        accs = accounts(data, allocation.id)
        for acc in accs:
            found += allocation_unbalanced(data, acc) + used_outside_allocation(data, acc)
        found += report_overdue(data, allocation, now)
        found += return_overdue(data, allocation, accs, now)
    # a step on a transferred item shows in the allocation's and the transfer's accounts
    return list({f.key: f for f in found}.values())


def findings_by_item(session: Session, now: datetime) -> dict[int, list[Finding]]:
    """Every allocation finding, by the item it is raised on (one load for all)."""
    out: dict[int, list[Finding]] = defaultdict(list)
    for f in findings(load(session), now):
        out[f.item_id].append(f)
    return dict(out)


def findings_for(session: Session, lineages: dict[int, list[int]], now: datetime
                 ) -> dict[int, list[Finding]]:
    """The allocation findings raised on each item, given its lineage (the item and its
    ancestors): only the allocation trees that hold the lineages are loaded."""
    wanted = sorted({i for lineage in lineages.values() for i in lineage})
    ids = sorted(set(session.scalars(select(AllocationItem.allocation_id).where(
        AllocationItem.item_id.in_(wanted)))))
    out: dict[int, list[Finding]] = defaultdict(list)
    for f in findings(load(session, ids), now):
        if f.item_id in lineages:
            out[f.item_id].append(f)
    return dict(out)
