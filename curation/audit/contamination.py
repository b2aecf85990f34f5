"""Contamination control: control readings against baselines, and tracing which items
shared an exposure with a control that failed.

A reading passes or fails against its indicator: with an absolute threshold it fails above
the threshold; with a k-sigma threshold it fails when z = (value - baseline) / u_c exceeds k,
u_c = sqrt(u_value² + u_baseline²) (combined standard uncertainty, JCGM 100:2008 §5.1).

Two items share an exposure within a window when, during it, they
  * sat in the same container (nested), or one sat inside the other,
  * were on the timeline of events logged in one submission (one handling or chamber session),
  * were at the same place (glovebox, room, instrument) over overlapping intervals,
  * or one was cut from the other after the window opened.
The window runs from the control's last passing reading before the failure (or the
beginning) to the failing reading.
"""

from __future__ import annotations

import math
from collections import deque
from dataclasses import dataclass
from datetime import datetime

from sqlalchemy import and_, func, or_, select
from sqlalchemy.orm import Session

from curation import history
from curation.audit.findings import ERROR, WARNING, Finding, ItemContext
from curation.model import Derivation, Event, Indicator, Item


@dataclass(frozen=True)
class Verdict:
    """A control reading judged against its indicator."""

    passed: bool
    z: float
    #: the value the reading had to stay at or under (in the indicator's unit)
    limit: float


def evaluate(indicator: Indicator, value: float, uncertainty: float) -> Verdict:
    """Pass or fail, with the z-score against the baseline."""
    u_c = math.hypot(uncertainty, indicator.baseline_uncertainty)
    excess = value - indicator.baseline_value
    z = excess / u_c if u_c > 0 else math.copysign(math.inf, excess) if excess else 0.0
    if indicator.threshold_kind == "absolute":
        return Verdict(value <= indicator.threshold_value, z, indicator.threshold_value)
    limit = indicator.baseline_value + indicator.threshold_value * u_c
    return Verdict(z <= indicator.threshold_value, z, limit)


@dataclass(frozen=True)
class Link:
    """Why one item is at risk from another: the kind of sharing and its evidence."""

    kind: str
    from_id: int
    to_id: int
    description: str
    event_ids: tuple[int, ...] = ()


@dataclass(frozen=True)
class AtRisk:
    """An item that shared an exposure (transitively) with a failed control."""

    item_id: int
    depth: int
    path: tuple[Link, ...]


def _span(ev: Event) -> tuple[datetime, datetime]:
    return ev.occurred_at, ev.ended_at or ev.occurred_at


def _overlaps(a: tuple[datetime | None, datetime | None],
              b: tuple[datetime | None, datetime | None]) -> bool:
    (a0, a1), (b0, b1) = a, b
    return (a1 is None or b0 is None or b0 <= a1) and (b1 is None or a0 is None or a0 <= b1)


def _cut(a: tuple[datetime | None, datetime | None],
         b: tuple[datetime, datetime]) -> tuple[datetime, datetime]:
    lo = b[0] if a[0] is None else max(a[0], b[0])
    hi = b[1] if a[1] is None else min(a[1], b[1])
    return lo, hi


def _holders(session: Session, item_id: int, span: tuple[datetime, datetime]) -> list[int]:
    """The item and everything inside it during the span."""
    return [item_id] + [w.subject_id for w in history.contents(session, item_id, *span)]


def _by_container(session: Session, item_id: int, window: tuple[datetime, datetime]) -> list[Link]:
    links = []
    outer = [w for w in history.windows(session, item_id, None)
             if w.ancestor_depth == 0 and w.nesting_depth > 0 and _overlaps((w.start, w.end), window)]
    for w in outer:
        span = _cut((w.start, w.end), window)
        links.append(Link("inside", item_id, w.subject_id, f"sat inside item {w.subject_id}"))
        for other in history.contents(session, w.subject_id, *span):
            links.append(Link("same container", item_id, other.subject_id,
                              f"in container {w.subject_id} together"))
    for inner in history.contents(session, item_id, *window):
        links.append(Link("inside", item_id, inner.subject_id, f"item {inner.subject_id} inside"))
    return links


def _where_it_was(session: Session, item_id: int, window: tuple[datetime, datetime]) -> list[Event]:
    return [h.event for h in history.effective_history(session, item_id)
            if h.reach in (history.OWN, history.CONTAINER) and h.event.kind in ("handling", "step")
            and _overlaps(_span(h.event), window)]


def _by_event(session: Session, item_id: int, window: tuple[datetime, datetime]) -> list[Link]:
    links = []
    for ev in _where_it_was(session, item_id, window):
        span = _cut(_span(ev), window)
        same = [Event.submission_key == ev.submission_key] if ev.submission_key else []
        if ev.location_id is not None:
            same.append(and_(Event.location_id == ev.location_id,
                             Event.occurred_at <= span[1],
                             func.coalesce(Event.ended_at, Event.occurred_at) >= span[0]))
        if not same:
            continue
        for other in session.scalars(select(Event).where(
                or_(*same), Event.kind.in_(("handling", "step")), Event.id != ev.id)):
            kind = "same session" if ev.submission_key and other.submission_key == ev.submission_key \
                else "same place"
            for holder in _holders(session, other.item_id, _cut(_span(other), window)):
                links.append(Link(kind, item_id, holder, f"{kind}: events {ev.id} and {other.id}",
                                  (ev.id, other.id)))
    return links


def _by_cut(session: Session, item_id: int, window: tuple[datetime, datetime]) -> list[Link]:
    return [Link("cut from", item_id, d.child_id, f"cut from it at {d.derived_at:%Y-%m-%d %H:%M}",
                 (d.step_id,) if d.step_id else ())
            for d in session.scalars(select(Derivation).where(
                Derivation.parent_id == item_id, Derivation.derived_at >= window[0]))]


def neighbours(session: Session, item_id: int, window: tuple[datetime, datetime]) -> list[Link]:
    """Every direct sharing of an exposure between the item and another within the window."""
    found = _by_container(session, item_id, window) + _by_event(session, item_id, window)
    found += _by_cut(session, item_id, window)
    return [link for link in found if link.to_id != item_id]


def trace(session: Session, control: Item, window: tuple[datetime, datetime],
          depth: int = 2) -> list[AtRisk]:
    """Items that shared an exposure with the control within the window, nearest first."""
    paths: dict[int, tuple[Link, ...]] = {control.id: ()}
    queue = deque([control.id])
    while queue:
        current = queue.popleft()
        if len(paths[current]) >= depth:
            continue
        for link in neighbours(session, current, window):
            if link.to_id not in paths:
                paths[link.to_id] = (*paths[current], link)
                queue.append(link.to_id)
    found = [AtRisk(i, len(p), p) for i, p in paths.items() if i != control.id]
    return sorted(found, key=lambda r: (r.depth, r.item_id))


def reading_verdicts(ctx: ItemContext) -> list[tuple[Event, Indicator, Verdict]]:
    """The control's own readings, each judged against its indicator."""
    found = []
    for ev in ctx.own():
        details = ev.details or {}
        indicator = ctx.indicators.get(details.get("indicator_id", -1))
        if ev.kind == "reading" and indicator is not None:
            found.append((ev, indicator, evaluate(indicator, float(details["value"]),
                                                  float(details.get("uncertainty", 0.0)))))
    return found


def control_failed(ctx: ItemContext) -> list[Finding]:
    """A control reading above its indicator's threshold."""
    return [ctx.finding(
        "control-failed", ERROR,
        f"{indicator.name} on control {ctx.item.code}: {ev.details['value']:g} "
        f"{indicator.unit} (z = {verdict.z:.1f}) is above the limit {verdict.limit:.3g} "
        f"{indicator.unit}", [ev])
        for ev, indicator, verdict in reading_verdicts(ctx) if not verdict.passed]


def missing_control(ctx: ItemContext) -> list[Finding]:
    """Handling of a pristine item, in a study with a control set, with no control present."""
    if not (ctx.item.is_pristine and ctx.has_control_set) or ctx.travels_with_control:
        return []
    return [ctx.finding(
        "missing-control", WARNING,
        f"{ctx.item.code} is pristine but no control was linked to its handling "
        f"({h.event.summary or h.event.environment})", [h.event])
        for h in ctx.where_it_was()
        if h.event.kind == "handling" and h.event.id not in ctx.linked_events
        and not (h.event.details or {}).get("controls")]


def failure_window(readings: list[tuple[Event, Indicator, Verdict]], failed: Event
                   ) -> tuple[datetime, datetime]:
    """From the last passing reading of the same indicator before the failure, to it."""
    code = failed.action
    passes = [ev.occurred_at for ev, _, v in readings
              if v.passed and ev.action == code and ev.occurred_at < failed.occurred_at]
    start = max(passes) if passes else datetime.min.replace(tzinfo=failed.occurred_at.tzinfo)
    return start, failed.occurred_at
