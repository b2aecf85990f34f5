"""Run every rule over items: one effective history per item, findings streamed out."""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Callable, Iterator, Sequence
from datetime import datetime

from sqlalchemy import select
from sqlalchemy.orm import Session, joinedload

from curation import history
from curation.audit import allocations, budgets, contamination, custody, environment, timeline
from curation.audit.findings import Finding, ItemContext, Thresholds
from curation.db import utcnow
from curation.techniques import Dose
from curation.model import (
    ControlLink,
    Derivation,
    Disposition,
    EnvironmentReading,
    Event,
    Indicator,
    Item,
    Study,
    StudyItem,
)

Rule = Callable[[ItemContext], list[Finding]]

#: every rule, by the finding codes it can raise
RULES: dict[str, Rule] = {
    "custody-walk": custody.walk_findings,
    "never-in-custody": custody.never_in_custody,
    "unreceived-transfer": custody.unreceived_transfer,
    "location-conflict": custody.location_conflict,
    "clock-skew": timeline.clock_skew,
    "out-of-order": timeline.out_of_order,
    "environment-out-of-spec": environment.environment_out_of_spec,
    "pristine-broken": environment.pristine_broken,
    "dose-over-limit": budgets.dose_over_limit,
    "exposure-over-limit": budgets.exposure_over_limit,
    "order-violation": budgets.order_violation,
    "mass-not-conserved": budgets.mass_not_conserved,
    "control-failed": contamination.control_failed,
    "missing-control": contamination.missing_control,
}

#: every finding code the engine can raise
CODES = (
    "custody-gap", "unreceived-transfer", "receipt-by-other", "double-custody",
    "location-conflict", "seal-broken", "seal-mismatch", "clock-skew", "out-of-order",
    "orphan-item", "environment-out-of-spec", "pristine-broken",
    "dose-over-limit", "exposure-over-limit", "order-violation", "mass-not-conserved",
    "control-failed", "missing-control",
    *allocations.ALLOCATION_CODES,
)


#: items audited together: each batch costs a fixed number of statements
BATCH = 100


def _thresholds(session: Session, ids: list[int]) -> dict[int, Thresholds]:
    """Each item's first study's rules over the defaults, one query."""
    rules: dict[int, dict | None] = {}
    for item_id, chosen in session.execute(
            select(StudyItem.item_id, Study.rules).join(Study, Study.id == StudyItem.study_id)
            .where(StudyItem.item_id.in_(ids)).order_by(StudyItem.item_id, Study.id)):
        rules.setdefault(item_id, chosen)
    return {i: Thresholds.from_rules(rules.get(i)) for i in ids}


def context(session: Session, item: Item, now: datetime | None = None) -> ItemContext:
    """Everything the rules need about one item."""
    return contexts(session, [item], now)[0]


def contexts(session: Session, items: Sequence[Item], now: datetime | None = None,
             histories: dict[int, list[history.HistoryEntry]] | None = None
             ) -> list[ItemContext]:
    """Everything the rules need about each item: a fixed number of statements per call,
    whatever the number of items or the size of their families. `histories`: the items'
    whole effective histories when the caller has already resolved them."""
    ids = [i.id for i in items]
    moment = now or utcnow()
    if histories is None:
        histories = history.effective_histories(session, ids)
    event_ids = sorted({h.event.id for hs in histories.values() for h in hs})
    superseded = set(history.in_chunks(session, lambda c: select(Event.supersedes_id).where(
        Event.supersedes_id.in_(c)), event_ids))
    parents: dict[int, list[tuple[Item, datetime]]] = defaultdict(list)
    for d in session.scalars(select(Derivation).where(Derivation.child_id.in_(ids))
                             .options(joinedload(Derivation.parent))
                             .order_by(Derivation.derived_at, Derivation.id)):
        parents[d.child_id].append((d.parent, d.derived_at))
    children: dict[int, list[tuple[Derivation, Item]]] = defaultdict(list)
    for d in session.scalars(select(Derivation).where(Derivation.parent_id.in_(ids))
                             .options(joinedload(Derivation.child))
                             .order_by(Derivation.derived_at, Derivation.id)):
        children[d.parent_id].append((d, d.child))
    thresholds = _thresholds(session, ids)
    readings = _glovebox_readings(session, [h for hs in histories.values() for h in hs])
    lineages = history.ancestors_of(session, ids)
    doses: dict[int, Dose | None] = {}
    found = [ItemContext(
        item=item, history=histories[item.id], thresholds=thresholds[item.id], now=moment,
        parents=parents.get(item.id, []), superseded=superseded,
        readings=readings, children=children.get(item.id, []),
        ancestors=[a for a, _, _ in lineages[item.id]], doses=doses) for item in items]
    _load_controls(session, found, event_ids)
    return found


def _load_controls(session: Session, ctxs: list[ItemContext], event_ids: list[int]) -> None:
    """Each item's studies' indicators, control set and the control links that cover it."""
    ids = [c.item.id for c in ctxs]
    studies: dict[int, set[int]] = defaultdict(set)
    for item_id, study_id in session.execute(select(StudyItem.item_id, StudyItem.study_id)
                                             .where(StudyItem.item_id.in_(ids))):
        studies[item_id].add(study_id)
    every_study = sorted({s for found in studies.values() for s in found})
    indicators = list(session.scalars(select(Indicator).where(
        Indicator.study_id.in_(every_study)).order_by(Indicator.id)))
    with_controls = set(session.scalars(select(StudyItem.study_id).where(
        StudyItem.study_id.in_(every_study), StudyItem.role == "control").distinct()))
    lineage = sorted({i for c in ctxs for i in (c.item.id, *c.ancestors)})
    travelling = set(history.in_chunks(session, lambda c: select(ControlLink.sample_id).where(
        ControlLink.sample_id.in_(c)).distinct(), lineage))
    linked = set(history.in_chunks(session, lambda c: select(ControlLink.event_id).where(
        ControlLink.event_id.in_(c)), event_ids))
    for ctx in ctxs:
        mine = studies.get(ctx.item.id, set())
        ctx.indicators = {i.id: i for i in indicators if i.study_id in mine}
        ctx.has_control_set = bool(mine & with_controls)
        ctx.travels_with_control = bool(travelling & {ctx.item.id, *ctx.ancestors})
        ctx.linked_events = linked


def _glovebox_readings(session: Session, entries: list[history.HistoryEntry]
                       ) -> dict[int, list[EnvironmentReading]]:
    """Atmosphere readings of the gloveboxes the items were handled in, one query."""
    boxes = sorted({h.event.location_id for h in entries
                    if h.event.environment == "n2-glovebox" and h.event.location_id is not None})
    found: dict[int, list[EnvironmentReading]] = {box: [] for box in boxes}
    for reading in session.scalars(
            select(EnvironmentReading).where(
                EnvironmentReading.location_id.in_(boxes),
                EnvironmentReading.kind == "atmosphere")
            .order_by(EnvironmentReading.measured_at)):
        found[reading.location_id].append(reading)
    return found


def audit_item(session: Session, item: Item, now: datetime | None = None,
               allocated: dict[int, list[Finding]] | None = None,
               entries: list[history.HistoryEntry] | None = None) -> list[Finding]:
    """Every finding on one item, oldest first; `allocated`: the allocation findings by item,
    when the caller computed them for every item at once; `entries`: the item's whole
    effective history, when the caller already has it (the item page shows it too)."""
    return audit_items(session, [item], now, allocated,
                       None if entries is None else {item.id: entries})[item.id]


def audit_items(session: Session, items: Sequence[Item], now: datetime | None = None,
                allocated: dict[int, list[Finding]] | None = None,
                histories: dict[int, list[history.HistoryEntry]] | None = None
                ) -> dict[int, list[Finding]]:
    """Every finding on each item, oldest first, by item id; a fixed number of statements."""
    return audit_contexts(session, contexts(session, items, now, histories), allocated)


def audit_contexts(session: Session, ctxs: list[ItemContext],
                   allocated: dict[int, list[Finding]] | None = None
                   ) -> dict[int, list[Finding]]:
    """Every finding on each context's item (built by `contexts` at one instant), by item id."""
    moment = ctxs[0].now if ctxs else utcnow()
    ends = _ends(session, ctxs)
    if allocated is None:
        # allocation rules read a whole allocation, not one item's context (audit/allocations.py)
        allocated = allocations.findings_for(
            session, {c.item.id: [c.item.id, *c.ancestors] for c in ctxs}, moment)
    out: dict[int, list[Finding]] = {}
    for ctx in ctxs:
        found: list[Finding] = []
        for rule in RULES.values():
            found.extend(rule(ctx))
        found.extend(timeline.orphan_item(ctx, ends))
        found.extend(allocated.get(ctx.item.id, []))
        out[ctx.item.id] = sorted(found, key=lambda f: (f.at is None, f.at or moment, f.code))
    return out


def _ends(session: Session, ctxs: list[ItemContext]) -> dict[int, datetime | None]:
    """When each parent of the items was consumed or lost (None: not), one query."""
    wanted = sorted({p.id for c in ctxs for p, _ in c.parents})
    own: dict[int, list[Event]] = defaultdict(list)
    for ev in session.scalars(select(Event).where(Event.item_id.in_(wanted))
                              .order_by(Event.item_id, Event.occurred_at, Event.id)):
        own[ev.item_id].append(ev)
    ends: dict[int, datetime | None] = {}
    for parent_id in wanted:
        last = timeline.end_of_life(own.get(parent_id, []))
        ends[parent_id] = last.occurred_at if last is not None else None
    return ends


def audit(session: Session, *, item_codes: list[str] | None = None, study: str | None = None,
          now: datetime | None = None, batch: int = BATCH,
          progress: Callable[[int], None] | None = None) -> Iterator[Finding]:
    """Findings over all items (or the named ones, or a study's), in batches of items read
    in id order, so memory stays flat however large the collection; `progress` is told how
    many items are done after each batch."""
    stmt = select(Item).order_by(Item.id).limit(batch)
    if item_codes:
        stmt = stmt.where(Item.code.in_(item_codes))
    if study:
        stmt = stmt.join(StudyItem, StudyItem.item_id == Item.id).join(
            Study, Study.id == StudyItem.study_id).where(Study.code == study)
    moment = now or utcnow()
    allocated = allocations.findings_by_item(session, moment)
    last, done = 0, 0
    while items := session.scalars(stmt.where(Item.id > last)).all():
        found = audit_items(session, items, moment, allocated)
        for item in items:
            yield from found[item.id]
        last, done = items[-1].id, done + len(items)
        if progress is not None:
            progress(done)
        del found, items


def dispositions(session: Session, findings: list[Finding]) -> dict[str, Disposition]:
    """The latest disposition of each finding that has one, by finding key."""
    keys = {f.key for f in findings}
    latest: dict[str, Disposition] = {}
    if keys:
        for d in session.scalars(select(Disposition).where(Disposition.finding_key.in_(keys))
                                 .order_by(Disposition.recorded_at, Disposition.id)):
            latest[d.finding_key] = d
    return latest
