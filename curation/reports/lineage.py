"""The per-particle lineage report: everything known about one returned particle and all that
was cut from it, gathered in a fixed number of queries whatever the size of the family.

The particle's own story (custody, handling, budgets, findings) comes from the resolver and
the audit; the family's steps, files and mass budgets come from `IN` queries over the
family's item ids, so a particle with a thousand needles costs what one with three does.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field

from sqlalchemy import select
from sqlalchemy.orm import Session, joinedload, selectinload

from curation import history
from curation.audit import engine, mass
from curation.audit.exposure import event_dose
from curation.audit.findings import Finding, ItemContext
from curation.model import (
    AllocationItem,
    DataFile,
    Derivation,
    Disposition,
    Event,
    Item,
    Placement,
    Station,
    StudyItem,
)
from curation.reports.budgets import ItemBudget, budget_of
from curation.services.common import item_by_code
from curation.techniques import Dose


@dataclass(frozen=True)
class StepRow:
    """One step on a family item, with its dose and the files it wrote."""

    event: Event
    dose: Dose | None
    files: list[DataFile]
    superseded: bool


@dataclass(frozen=True)
class MemberRow:
    """One item of the family: where it is, its status, its mass budget."""

    node: history.TreeNode
    #: (container, position) innermost first, for what holds it now
    holders: list[tuple[Item, str]]
    #: the last place an event on it (or its holder) names
    last_place: str
    mass: mass.MassBudget


@dataclass
class LineageReport:
    """Everything the lineage report shows."""

    particle: Item
    tree: list[history.TreeNode]
    allocations: list[AllocationItem]
    studies: list[StudyItem]
    members: list[MemberRow]
    steps: list[StepRow]
    custody: list[Event]
    handling: list[Event]
    controls: list[tuple[Item, str]]
    findings: list[tuple[Finding, Disposition | None]]
    budget: ItemBudget
    derivations: dict[int, Derivation] = field(default_factory=dict)

    @property
    def descendants(self) -> list[MemberRow]:
        return [m for m in self.members if m.node.item.id != self.particle.id]


def root_of(session: Session, code: str) -> tuple[Item, list[history.TreeNode]]:
    """The returned particle at the top of the item's family, and the family tree."""
    item = item_by_code(session, code)
    tree = history.lineage_tree(session, item.id)
    roots = [n.item for n in tree if n.parent_id is None]
    particle = next((r for r in roots if r.kind == "particle"), roots[0] if roots else item)
    return particle, tree


def build(session: Session, code: str) -> LineageReport:
    """The lineage report of the particle `code` belongs to."""
    particle, tree = root_of(session, code)
    ids = [n.item.id for n in tree]
    events = _family_events(session, ids)
    derivations = {d.child_id: d for d in session.scalars(
        select(Derivation).where(Derivation.child_id.in_(ids)))}
    # the audit's contexts of the whole family, once: the particle's budget and story, and
    # every member's findings
    ctxs = engine.contexts(session, [n.item for n in tree])
    mine = next(c for c in ctxs if c.item.id == particle.id)
    entries = mine.history
    holders = _holders(session, ids)
    return LineageReport(
        particle=particle, tree=tree,
        allocations=list(session.scalars(
            select(AllocationItem).where(AllocationItem.item_id == particle.id)
            .options(joinedload(AllocationItem.allocation)))),
        studies=list(session.scalars(select(StudyItem).where(StudyItem.item_id == particle.id)
                                     .options(joinedload(StudyItem.study)))),
        members=_members(tree, events, derivations, holders),
        steps=_steps(session, events),
        custody=_merge(entries, events, holders, "custody", session),
        handling=_merge(entries, events, holders, "handling", session),
        controls=_controls(session, particle, entries, events),
        findings=_findings(session, ctxs),
        budget=budget_of(mine), derivations=derivations)


def _family_events(session: Session, ids: list[int]) -> list[Event]:
    return list(session.scalars(
        select(Event).where(Event.item_id.in_(ids)).order_by(Event.occurred_at, Event.id)
        .options(selectinload(Event.actor), selectinload(Event.location),
                 selectinload(Event.station).selectinload(Station.instrument),
                 selectinload(Event.counterparty))))


def _steps(session: Session, events: list[Event]) -> list[StepRow]:
    steps = [e for e in events if e.kind == "step"]
    files: dict[int, list[DataFile]] = defaultdict(list)
    if steps:
        for f in session.scalars(select(DataFile).where(
                DataFile.event_id.in_([e.id for e in steps])).order_by(DataFile.id)):
            files[f.event_id or 0].append(f)
    replaced = {e.supersedes_id for e in events if e.supersedes_id is not None}
    return [StepRow(e, event_dose(e), files[e.id], e.id in replaced) for e in steps]


def _holders(session: Session, ids: list[int]) -> list[Placement]:
    """Every placement of a family item (open or closed), with the container."""
    return list(session.scalars(
        select(Placement).where(Placement.item_id.in_(ids))
        .options(joinedload(Placement.container)).order_by(Placement.placed_at)))


def _members(tree: list[history.TreeNode], events: list[Event],
             derivations: dict[int, Derivation], holders: list[Placement]) -> list[MemberRow]:
    own: dict[int, list[Event]] = defaultdict(list)
    replaced = {e.supersedes_id for e in events}
    for e in events:
        if e.id not in replaced:
            own[e.item_id].append(e)
    children: dict[int, list[tuple[Derivation, Item]]] = defaultdict(list)
    by_id = {n.item.id: n.item for n in tree}
    for d in derivations.values():
        if d.parent_id in by_id:
            children[d.parent_id].append((d, by_id[d.child_id]))
    now_in = {p.item_id: p for p in holders if p.removed_at is None}
    rows = []
    for node in tree:
        i = node.item.id
        held = now_in.get(i)
        places = [e.location.name for e in own[i] if e.location is not None]
        rows.append(MemberRow(
            node, [(held.container, held.position)] if held else [],
            places[-1] if places else "—",
            mass.mass_budget(node.item, children[i], own[i])))
    return rows


def _merge(entries: list[history.HistoryEntry], events: list[Event], holders: list[Placement],
           kind: str, session: Session) -> list[Event]:
    """The particle's `kind` events (resolver) with the family's own and their holders' while
    holding them, oldest first, each once."""
    found = {h.event.id: h.event for h in entries if h.event.kind == kind}
    found.update({e.id: e for e in events if e.kind == kind})
    if holders:
        for e in session.scalars(select(Event).where(
                Event.kind == kind, Event.item_id.in_({p.container_id for p in holders}))
                .options(selectinload(Event.actor), selectinload(Event.location),
                         selectinload(Event.item))):
            if any(p.container_id == e.item_id and p.placed_at <= e.occurred_at
                   and (p.removed_at is None or e.occurred_at <= p.removed_at)
                   for p in holders):
                found[e.id] = e
    return sorted(found.values(), key=lambda e: (e.occurred_at, e.id))


def _controls(session: Session, particle: Item, entries: list[history.HistoryEntry],
              events: list[Event]) -> list[tuple[Item, str]]:
    """Controls enrolled in the particle's studies, and those named in handling details."""
    studies = select(StudyItem.study_id).where(StudyItem.item_id == particle.id)
    enrolled = session.scalars(select(StudyItem).where(
        StudyItem.study_id.in_(studies), StudyItem.role == "control")
        .options(joinedload(StudyItem.item), joinedload(StudyItem.study)))
    found = {s.item.code: (s.item, f"enrolled as a control in {s.study.code}") for s in enrolled}
    named = {str(c) for e in [*(h.event for h in entries), *events]
             if e.kind == "handling" for c in (e.details or {}).get("controls", [])}
    for item in session.scalars(select(Item).where(Item.code.in_(sorted(named)))):
        note = "named in a handling session with the family"
        found[item.code] = (item, found[item.code][1] + "; " + note if item.code in found
                            else note)
    return [found[c] for c in sorted(found)]


def _findings(session: Session, ctxs: list[ItemContext]
              ) -> list[tuple[Finding, Disposition | None]]:
    """The audit's findings on every item of the family, in one batch, family order."""
    by_item = engine.audit_contexts(session, ctxs)
    found = [f for ctx in ctxs for f in by_item[ctx.item.id]]
    decided = engine.dispositions(session, found)
    return [(f, decided.get(f.key)) for f in found]
