"""Run every rule over items: one effective history per item, findings streamed out."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from datetime import datetime

from sqlalchemy import select
from sqlalchemy.orm import Session, joinedload

from curation import history
from curation.audit import allocations, budgets, contamination, custody, environment, timeline
from curation.audit.findings import Finding, ItemContext, Thresholds
from curation.db import utcnow
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


def thresholds_for(session: Session, item: Item) -> Thresholds:
    """The item's first study's rules over the defaults."""
    rules = session.scalars(
        select(Study.rules).join(StudyItem, StudyItem.study_id == Study.id)
        .where(StudyItem.item_id == item.id).order_by(Study.id).limit(1)).first()
    return Thresholds.from_rules(rules)


def context(session: Session, item: Item, now: datetime | None = None) -> ItemContext:
    """Everything the rules need about one item."""
    entries = history.effective_history(session, item.id)
    ids = [h.event.id for h in entries]
    superseded = set(session.scalars(
        select(Event.supersedes_id).where(Event.supersedes_id.in_(ids)))) if ids else set()
    parents = [(d.parent, d.derived_at) for d in session.scalars(
        select(Derivation).where(Derivation.child_id == item.id))]
    ctx = ItemContext(item=item, history=entries, thresholds=thresholds_for(session, item),
                      now=now or utcnow(), parents=parents, superseded=superseded,
                      readings=_glovebox_readings(session, entries), children=_children(session, item))
    _load_controls(session, ctx)
    return ctx


def _load_controls(session: Session, ctx: ItemContext) -> None:
    """The item's studies' indicators, control set and the control links that cover it."""
    studies = select(StudyItem.study_id).where(StudyItem.item_id == ctx.item.id)
    ctx.indicators = {i.id: i for i in session.scalars(
        select(Indicator).where(Indicator.study_id.in_(studies)))}
    ctx.has_control_set = session.scalar(select(StudyItem.id).where(
        StudyItem.study_id.in_(studies), StudyItem.role == "control").limit(1)) is not None
    lineage = [ctx.item.id] + [a for a, _, _ in history.ancestors(session, ctx.item.id)]
    ctx.travels_with_control = session.scalar(select(ControlLink.id).where(
        ControlLink.sample_id.in_(lineage)).limit(1)) is not None
    ids = [h.event.id for h in ctx.history]
    ctx.linked_events = set(session.scalars(select(ControlLink.event_id).where(
        ControlLink.event_id.in_(ids)))) if ids else set()


def _children(session: Session, item: Item) -> list[tuple[Derivation, Item]]:
    """Derivations cutting children from the item, with the children, one query."""
    return [(d, d.child) for d in session.scalars(
        select(Derivation).where(Derivation.parent_id == item.id)
        .options(joinedload(Derivation.child)).order_by(Derivation.derived_at, Derivation.id))]


def _glovebox_readings(session: Session, entries: list[history.HistoryEntry]
                       ) -> dict[int, list[EnvironmentReading]]:
    """Atmosphere readings of the gloveboxes the item was handled in, one query."""
    boxes = {h.event.location_id for h in entries
             if h.event.environment == "n2-glovebox" and h.event.location_id is not None}
    found: dict[int, list[EnvironmentReading]] = {box: [] for box in boxes}
    if boxes:
        for reading in session.scalars(
                select(EnvironmentReading).where(
                    EnvironmentReading.location_id.in_(boxes),
                    EnvironmentReading.kind == "atmosphere")
                .order_by(EnvironmentReading.measured_at)):
            found[reading.location_id].append(reading)
    return found


def audit_item(session: Session, item: Item, now: datetime | None = None,
               allocated: dict[int, list[Finding]] | None = None) -> list[Finding]:
    """Every finding on one item, oldest first; `allocated`: the allocation findings by item,
    when the caller computed them for every item at once."""
    ctx = context(session, item, now)
    found: list[Finding] = []
    for rule in RULES.values():
        found.extend(rule(ctx))
    ends = {p.id: _end(session, p) for p, _ in ctx.parents}
    found.extend(timeline.orphan_item(ctx, ends))
    # allocation rules read a whole allocation, not one item's context (audit/allocations.py)
    found.extend(allocations.item_findings(session, item, ctx.now) if allocated is None
                 else allocated.get(item.id, []))
    return sorted(found, key=lambda f: (f.at is None, f.at or ctx.now, f.code))


def _end(session: Session, item: Item) -> datetime | None:
    own = session.scalars(select(Event).where(Event.item_id == item.id)
                          .order_by(Event.occurred_at, Event.id)).all()
    last = timeline.end_of_life(list(own))
    return last.occurred_at if last is not None else None


def audit(session: Session, *, item_codes: list[str] | None = None, study: str | None = None,
          now: datetime | None = None) -> Iterator[Finding]:
    """Findings over all items (or the named ones, or a study's), item by item."""
    stmt = select(Item.id).order_by(Item.id)
    if item_codes:
        stmt = stmt.where(Item.code.in_(item_codes))
    if study:
        stmt = stmt.join(StudyItem, StudyItem.item_id == Item.id).join(
            Study, Study.id == StudyItem.study_id).where(Study.code == study)
    moment = now or utcnow()
    allocated = allocations.findings_by_item(session, moment)
    for item_id in session.scalars(stmt).all():
        item = session.get(Item, item_id)
        if item is not None:
            yield from audit_item(session, item, moment, allocated)


def dispositions(session: Session, findings: list[Finding]) -> dict[str, Disposition]:
    """The latest disposition of each finding that has one, by finding key."""
    keys = {f.key for f in findings}
    latest: dict[str, Disposition] = {}
    if keys:
        for d in session.scalars(select(Disposition).where(Disposition.finding_key.in_(keys))
                                 .order_by(Disposition.recorded_at, Disposition.id)):
            latest[d.finding_key] = d
    return latest
