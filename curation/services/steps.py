"""Instrument sessions: validate a step against its technique and station, store its dose,
and register what a destructive step made (lamellae, wedges, needles, fragments).

`check_step` validates without writing (the form's confirmation round); `record_step` writes
one event per item, all sharing one submission key, so a repeated submission writes nothing.
"""

from __future__ import annotations

import uuid
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime

from sqlalchemy import func, select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session, selectinload

from curation import ledger, techniques
from curation.errors import CurationError, InvalidInput, RuleViolation
from curation.model import Derivation, Event, EventKind, Item, Person, Placement, Station
from curation.services import items as item_writes
from curation.services.common import aware
from curation.services.events import dose_columns, record_event
from curation.techniques import Dose, RangeWarning, Technique, Validated

#: the letter of each child kind in a child's code: KR-0302 → KR-0302-L1, KR-0302-W1-N2
CODE_LETTERS = {"lamella": "L", "wedge": "W", "needle": "N", "fragment": "F"}
#: container kinds a new child may be placed on, post by post
HOLDER_KINDS = ("coupon", "grid")
#: a station without an instrument (a bench, a glovebox tablet) runs the bench preparation steps
BENCH_FAMILY = "preparation"
#: the longest summary an event keeps
MAX_SUMMARY = 300


class WarningsNeedConfirmation(CurationError):
    """Values outside their typical range: accepted only once the operator confirms them."""

    def __init__(self, warnings: Sequence[RangeWarning]) -> None:
        self.warnings = tuple(warnings)
        super().__init__("outside the typical range, confirm to record: "
                         + "; ".join(w.message for w in self.warnings))


@dataclass(frozen=True)
class Children:
    """What a destructive step made: how many of which kind, and the posts they stand on."""

    #: None: the technique's only kind, or its `child_kind` parameter (lift-out)
    kind: str | None = None
    #: None: the technique's `<kind>_count` parameter (needle_count, ...), else 1
    count: int | None = None
    #: the coupon (or grid) the new items are placed on, one numbered post each
    coupon: Item | None = None
    first_post: int = 1


@dataclass(frozen=True)
class NewChild:
    """One item the step will make: its code, its parent and the post it goes on."""

    code: str
    kind: str
    parent: Item
    #: "post-03" on the coupon, or "" when not placed
    position: str = ""
    removed_volume_um3: float | None = None


@dataclass(frozen=True)
class StepPlan:
    """A checked step, nothing written yet: clean values, warnings, dose and new items."""

    technique: Technique
    validated: Validated
    dose: Dose | None
    children: tuple[NewChild, ...] = ()
    coupon: Item | None = None

    @property
    def warnings(self) -> tuple[RangeWarning, ...]:
        return self.validated.warnings


@dataclass(frozen=True)
class StepResult:
    """What a step wrote (or had written, for a repeated submission)."""

    events: list[Event]
    children: list[Item] = field(default_factory=list)
    #: the warnings the operator confirmed
    warnings: tuple[RangeWarning, ...] = ()
    #: True when the submission key had been recorded before and nothing new was written
    is_repeat: bool = False

    @property
    def submission_key(self) -> str | None:
        return self.events[0].submission_key if self.events else None


# ---- checks ---------------------------------------------------------------------------


def station_techniques(station: Station) -> list[Technique]:
    """The techniques a station can log: its instrument's, or the bench steps without one."""
    if station.instrument is not None:
        return techniques.for_instrument(station.instrument.techniques)
    return [t for t in techniques.for_family(BENCH_FAMILY) if not t.puts_beam]


def check_technique(station: Station, code: str) -> Technique:
    """The technique, refused when the station's instrument does not run it."""
    technique = techniques.get(code)
    allowed = station_techniques(station)
    if technique not in allowed:
        runs = ", ".join(t.code for t in allowed) or "nothing"
        where = (f"instrument {station.instrument.code}" if station.instrument is not None
                 else f"station {station.code} (no instrument)")
        raise InvalidInput("technique", technique.code,
                           f"{technique.code} is not run by {where}; it runs: {runs}")
    return technique


def check_step(
    session: Session, *, station: Station, technique: str, items: Sequence[Item],
    raw_params: Mapping[str, object], children: Children | None = None,
) -> StepPlan:
    """Validate a step without writing: technique, parameters (every problem), new items."""
    spec = check_technique(station, technique)
    _check_items(items)
    validated = techniques.validate(spec.code, raw_params)
    dose = techniques.dose_for(spec, validated.values)
    if children is None:
        return StepPlan(spec, validated, dose)
    new = _plan_children(session, spec, validated, items, children)
    return StepPlan(spec, validated, dose, new, children.coupon)


def _check_items(items: Sequence[Item]) -> None:
    if not items:
        raise InvalidInput("items", [], "at least one item code")
    codes = [i.code for i in items]
    twice = sorted({c for c in codes if codes.count(c) > 1})
    if twice:
        raise InvalidInput("items", twice, "each item once")


# ---- new items ------------------------------------------------------------------------


def _child_kind(spec: Technique, validated: Validated, asked: str | None) -> str:
    """The kind to make: asked for, the step's own choice, or the technique's only kind."""
    chosen = validated.values.get("child_kind")
    if asked is not None and chosen is not None and asked != chosen:
        raise InvalidInput("child_kind", chosen, f"the kind of item made: {asked}")
    kind = asked or (str(chosen) if chosen is not None else None)
    if kind is None and len(spec.creates) == 1:
        kind = spec.creates[0]
    if kind not in spec.creates:
        raise InvalidInput("child_kind", kind,
                           f"one of the kinds {spec.code} makes: {', '.join(spec.creates) or 'none'}")
    return kind


def _child_count(spec: Technique, validated: Validated, kind: str, asked: int | None) -> int:
    """How many to make: asked for, or the step's `<kind>_count` parameter, else one."""
    name = f"{kind}_count"
    given = validated.values.get(name) if spec.field(name) is not None else None
    if asked is not None and given is not None and asked != given:
        raise InvalidInput(name, given, f"the number of items made: {asked}")
    count = asked if asked is not None else int(given) if given is not None else 1
    if not 1 <= count <= 100:
        raise InvalidInput(name, count, "from 1 to 100 new items per step")
    return count


def _plan_children(session: Session, spec: Technique, validated: Validated,
                   items: Sequence[Item], asked: Children) -> tuple[NewChild, ...]:
    """Codes, posts and volume shares of the items the step makes from its one parent."""
    if not spec.creates:
        raise InvalidInput("children", asked.kind, f"{spec.code} makes no new items")
    if len(items) != 1:
        raise InvalidInput("items", [i.code for i in items],
                           "one item when the step makes new items (their parent)")
    parent = items[0]
    kind = _child_kind(spec, validated, asked.kind)
    count = _child_count(spec, validated, kind, asked.count)
    codes = free_codes(session, parent.code, kind, count)
    posts = _free_posts(session, asked, kind, count)
    removed = validated.values.get("removed_volume_um3")
    share = float(removed) / count if isinstance(removed, int | float) else None
    return tuple(NewChild(code, kind, parent, post, share) for code, post in zip(codes, posts))


def free_codes(session: Session, parent_code: str, kind: str, count: int) -> list[str]:
    """The next `count` child codes never used: KR-0302 → KR-0302-N1, -N2, ...; taken skipped."""
    stem = f"{parent_code}-{CODE_LETTERS[kind]}"
    taken = {c.lower() for c in session.scalars(
        select(Item.code).where(func.lower(Item.code).startswith(stem.lower(), autoescape=True)))}
    codes: list[str] = []
    n = 0
    while len(codes) < count:
        n += 1
        if f"{stem}{n}".lower() not in taken:
            codes.append(f"{stem}{n}")
    for code in codes:
        item_writes.check_code(code)
    return codes


def post_name(number: int) -> str:
    """A coupon post as printed: 3 → "post-03"."""
    return f"post-{number:02d}"


def _free_posts(session: Session, asked: Children, kind: str, count: int) -> list[str]:
    """The posts the new items go on, refusing one that already holds an item."""
    coupon = asked.coupon
    if coupon is None:
        if kind == "needle":
            raise InvalidInput("coupon", "", "the code of the coupon the needles stand on")
        return [""] * count
    if coupon.kind not in HOLDER_KINDS:
        raise InvalidInput("coupon", coupon.code,
                           f"a {' or '.join(HOLDER_KINDS)}; {coupon.code} is a {coupon.kind}")
    if asked.first_post < 1:
        raise InvalidInput("first_post", asked.first_post, "a post number from 1")
    posts = [post_name(asked.first_post + k) for k in range(count)]
    held = session.execute(
        select(Placement.position, Item.code).join(Item, Item.id == Placement.item_id)
        .where(Placement.container_id == coupon.id, Placement.removed_at.is_(None),
               Placement.position.in_(posts)).order_by(Placement.position)).first()
    if held is not None:
        raise InvalidInput("first_post", asked.first_post,
                           f"free posts: {held.position} of {coupon.code} already holds "
                           f"{held.code}")
    return posts


# ---- writing --------------------------------------------------------------------------


def record_step(
    session: Session, *, actor: Person, station: Station, technique: str,
    items: Sequence[Item], occurred_at: datetime, ended_at: datetime | None = None,
    raw_params: Mapping[str, object], confirm_warnings: bool = False,
    submission_key: str | None = None, children: Children | None = None, summary: str = "",
    note: str = "",
) -> StepResult:
    """Log one instrument session over one or more items; a repeated submission key writes
    nothing and returns what the first one wrote."""
    ledger.attribute(session, actor)
    key = submission_key or uuid.uuid4().hex
    earlier = repeated(session, key, items)
    if earlier is not None:
        return earlier
    plan = check_step(session, station=station, technique=technique, items=items,
                      raw_params=raw_params, children=children)
    if plan.warnings and not confirm_warnings:
        raise WarningsNeedConfirmation(plan.warnings)
    _check_times(occurred_at, ended_at)
    try:
        # A second submission racing the first trips the unique key: answer as a repeat.
        with session.begin_nested():
            written = [_step_event(session, actor, station, plan, item, key, occurred_at,
                                   ended_at, summary, note) for item in items]
            made = _make_children(session, actor, plan, written[0], ended_at or occurred_at)
    except IntegrityError:
        earlier = repeated(session, key, items)
        if earlier is None:
            raise
        return earlier
    return StepResult(written, made, plan.warnings)


def _check_times(occurred_at: datetime, ended_at: datetime | None) -> None:
    aware("occurred_at", occurred_at)
    aware("ended_at", ended_at)
    if ended_at is not None and ended_at < occurred_at:
        raise InvalidInput("ended_at", ended_at.isoformat(),
                           f"at or after occurred_at {occurred_at.isoformat()}")


def written(session: Session, key: str) -> StepResult | None:
    """What the submission with this key wrote: its events and the items it made."""
    found = list(session.scalars(select(Event).where(Event.submission_key == key)
                                 .options(selectinload(Event.item)).order_by(Event.id)))
    if not found:
        return None
    made = session.scalars(select(Item).join(Derivation, Derivation.child_id == Item.id)
                           .where(Derivation.step_id.in_([e.id for e in found]))
                           .order_by(Item.id))
    return StepResult(found, list(made), is_repeat=True)


def repeated(session: Session, key: str, items: Sequence[Item]) -> StepResult | None:
    """What an earlier submission with this key wrote; refused when it covered other items."""
    earlier = written(session, key)
    if earlier is not None and {e.item_id for e in earlier.events} != {i.id for i in items}:
        raise RuleViolation(f"submission key {key} was already used for other items; "
                            "reload the station page to start a new submission")
    return earlier


def default_summary(plan: StepPlan) -> str:
    """The technique and, for a step that makes items, their codes."""
    text = plan.technique.label
    if plan.children:
        text += f": made {len(plan.children)} {plan.children[0].kind}(s) " + ", ".join(
            c.code for c in plan.children)
    return text if len(text) <= MAX_SUMMARY else text[:MAX_SUMMARY - 1] + "…"


def _confirmed_note(note: str, warnings: Sequence[RangeWarning]) -> str:
    """The note, with the out-of-typical values the operator confirmed appended."""
    if not warnings:
        return note
    said = "Confirmed outside the typical range: " + "; ".join(w.message for w in warnings)
    return f"{note}\n{said}" if note.strip() else said


def _step_event(session: Session, actor: Person, station: Station, plan: StepPlan, item: Item,
                key: str, occurred_at: datetime, ended_at: datetime | None, summary: str,
                note: str) -> Event:
    """One step event with its clean parameters and typed dose columns."""
    event = record_event(
        session, actor=actor, kind=EventKind.STEP.value, item=item, occurred_at=occurred_at,
        ended_at=ended_at, station=station, location=station.location,
        technique=plan.technique.code, is_destructive=plan.technique.is_destructive,
        submission_key=key, summary=summary.strip() or default_summary(plan),
        details=dict(plan.validated.values), note=_confirmed_note(note, plan.warnings),
        dose=dose_columns(plan.dose))
    return event


def _make_children(session: Session, actor: Person, plan: StepPlan, step: Event,
                   cut: datetime) -> list[Item]:
    """Register each new item, derive it from its parent by the step, place it on its post."""
    made = []
    for child in plan.children:
        parent = child.parent
        item = item_writes.register_item(
            session, actor=actor, code=child.code, kind=child.kind, created_at=cut,
            material=parent.material, is_pristine=parent.is_pristine, status="in-analysis",
            description=f"{child.kind.capitalize()} made from {parent.code} by "
                        f"{plan.technique.label.lower()}")
        item_writes.derive(session, actor=actor, parent=parent, child=item, derived_at=cut,
                           step=step, removed_volume_um3=child.removed_volume_um3)
        if plan.coupon is not None:
            item_writes.place(session, actor=actor, item=item, container=plan.coupon,
                              placed_at=cut, position=child.position)
        made.append(item)
    return made
