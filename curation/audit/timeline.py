"""Time rules: clocks that disagree, events outside the item's life, items without parents."""

from __future__ import annotations

from datetime import datetime, timedelta

from curation.audit.findings import ERROR, WARNING, Finding, ItemContext
from curation.model import Event, ItemKind

#: kinds that only come into being by being cut or split from another item
DERIVED_KINDS = frozenset({ItemKind.FRAGMENT, ItemKind.LAMELLA, ItemKind.WEDGE, ItemKind.NEEDLE})


def clock_skew(ctx: ItemContext) -> list[Finding]:
    """An event dated after the server wrote it (station clock ahead), or entered very late."""
    found = []
    ahead = timedelta(minutes=ctx.thresholds.clock_ahead_minutes)
    late = ctx.thresholds.late_entry_hours
    for ev in ctx.own():
        offset = ev.occurred_at - ev.recorded_at
        if offset > ahead:
            found.append(ctx.finding(
                "clock-skew", WARNING,
                f"event {ev.id} on {ctx.item.code} is dated {_minutes(offset)} after the server "
                f"recorded it: the clock of {_where(ev)} runs ahead", [ev]))
        elif late is not None and -offset > timedelta(hours=late):
            found.append(ctx.finding(
                "clock-skew", WARNING,
                f"event {ev.id} on {ctx.item.code} was recorded {_minutes(-offset)} after it "
                f"happened (limit {late:g} h)", [ev]))
    return found


def _minutes(delta: timedelta) -> str:
    minutes = delta.total_seconds() / 60
    return f"{minutes:.0f} min" if minutes < 120 else f"{minutes / 60:.1f} h"


def _where(ev: Event) -> str:
    return ev.station.name if ev.station is not None else "the recording device"


def end_of_life(events: list[Event]) -> Event | None:
    """The first event that consumed the item or declared it lost, if any."""
    for ev in events:
        details = ev.details or {}
        if details.get("consumed") is True or ev.action == "declared-lost":
            return ev
    return None


def out_of_order(ctx: ItemContext) -> list[Finding]:
    """An event before the item existed, or after it was consumed or lost."""
    own = ctx.own()
    found = [ctx.finding(
        "out-of-order", ERROR,
        f"event {ev.id} on {ctx.item.code} at {ev.occurred_at:%Y-%m-%d %H:%M} UTC is before the "
        f"item existed ({ctx.item.created_at:%Y-%m-%d %H:%M} UTC)", [ev])
        for ev in own if ev.occurred_at < ctx.item.created_at]
    last = end_of_life(own)
    if last is not None:
        found += [ctx.finding(
            "out-of-order", ERROR,
            f"event {ev.id} on {ctx.item.code} comes after the item was consumed or lost "
            f"(event {last.id})", [last, ev])
            for ev in own if ev.occurred_at > last.occurred_at]
    return found


def orphan_item(ctx: ItemContext, parent_ends: dict[int, datetime | None]) -> list[Finding]:
    """A cut item with no parent on record, or cut after its parent was consumed."""
    if not ctx.parents:
        if ctx.item.kind in DERIVED_KINDS:
            return [ctx.finding(
                "orphan-item", ERROR,
                f"{ctx.item.code} is a {ctx.item.kind} but no parent item is recorded", [],
                at=ctx.item.created_at)]
        return []
    found = []
    for parent, derived_at in ctx.parents:
        ended = parent_ends.get(parent.id)
        if ended is not None and derived_at > ended:
            found.append(ctx.finding(
                "orphan-item", ERROR,
                f"{ctx.item.code} was cut from {parent.code} at {derived_at:%Y-%m-%d %H:%M} UTC, "
                f"after {parent.code} was consumed or lost ({ended:%Y-%m-%d %H:%M} UTC)", [],
                at=derived_at))
    return found
