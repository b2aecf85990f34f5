"""Chain-of-custody rules: a walk over the custody events that reach an item.

Custody passes only when the recipient records a receipt; a release opens a hand-over
that a receipt closes. Custody of a container covers what sits inside it, and a derived
item starts in the custody its parent was in when it was cut (the ancestors' custody events
up to the cut reach it through the resolver). Practice followed: ASTM E1492 and
ISO/IEC 17025:2017 §7.4 (unambiguous identity and custody through subdivision and transfer).
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field
from datetime import timedelta

from curation.audit.findings import ERROR, WARNING, Finding, ItemContext
from curation.model import CONTROL_KINDS, Event, ItemKind


@dataclass
class CustodyState:
    """Who answers for the item, what is pending, where custody says it is."""

    custodian_id: int | None = None
    holder_event: Event | None = None
    pending: Event | None = None
    shipped: Event | None = None
    location: Event | None = None
    seals: dict[str, Event] = field(default_factory=dict)


def custody_events(ctx: ItemContext) -> list[Event]:
    """Custody events reaching the item (own, containers, ancestors up to the cut)."""
    return [h.event for h in ctx.current() if h.event.kind == "custody"]


def walk(ctx: ItemContext) -> Iterator[tuple[Event, CustodyState, list[Finding]]]:
    """Yield each custody event with the state after it and what it broke."""
    state = CustodyState()
    for ev in custody_events(ctx):
        found: list[Finding] = []
        step = _STEPS.get(ev.action or "")
        if step is not None:
            step(ctx, state, ev, found)
        if ev.location_id is not None:
            state.location = ev
        yield ev, state, found


def _release(ctx: ItemContext, s: CustodyState, ev: Event, found: list[Finding]) -> None:
    if s.custodian_id is not None and ev.actor_id != s.custodian_id and s.holder_event:
        found.append(ctx.finding(
            "double-custody", ERROR,
            f"{ev.actor.name} released {ctx.item.code} while {s.holder_event.actor.name} "
            f"held it", [s.holder_event, ev]))
    s.pending = ev


def _receipt(ctx: ItemContext, s: CustodyState, ev: Event, found: list[Finding]) -> None:
    if s.pending is not None:
        meant = s.pending.counterparty_id
        if meant is not None and meant != ev.actor_id:
            found.append(ctx.finding(
                "receipt-by-other", ERROR,
                f"{ctx.item.code} was released to {s.pending.counterparty.name} but received "
                f"by {ev.actor.name}", [s.pending, ev]))
        _gap(ctx, s.pending, ev, s.shipped, found)
    elif s.custodian_id is not None and s.custodian_id != ev.actor_id and s.holder_event:
        found.append(ctx.finding(
            "double-custody", ERROR,
            f"{ev.actor.name} received {ctx.item.code} while {s.holder_event.actor.name} "
            f"still held it (no release recorded)", [s.holder_event, ev]))
    s.custodian_id, s.holder_event, s.pending, s.shipped = ev.actor_id, ev, None, None


def _gap(ctx: ItemContext, release: Event, receipt: Event, shipped: Event | None,
         found: list[Finding]) -> None:
    limit = timedelta(minutes=ctx.thresholds.custody_gap_minutes)
    if shipped is None and receipt.occurred_at - release.occurred_at > limit:
        hours = (receipt.occurred_at - release.occurred_at).total_seconds() / 3600
        found.append(ctx.finding(
            "custody-gap", WARNING,
            f"{ctx.item.code} was with nobody for {hours:.1f} h between release and receipt "
            f"(limit {ctx.thresholds.custody_gap_minutes:g} min, no shipment recorded)",
            [release, receipt]))


def _store(ctx: ItemContext, s: CustodyState, ev: Event, found: list[Finding]) -> None:
    if s.custodian_id is None and s.pending is None:
        s.custodian_id, s.holder_event = ev.actor_id, ev


def _shipped(ctx: ItemContext, s: CustodyState, ev: Event, found: list[Finding]) -> None:
    s.shipped = ev
    if s.pending is None:
        s.pending = ev


def _seal(ctx: ItemContext, s: CustodyState, ev: Event, found: list[Finding]) -> None:
    seal_id = str((ev.details or {}).get("seal_id", ""))
    if ev.action == "seal-applied":
        s.seals[seal_id] = ev
        return
    applied = s.seals.get(seal_id)
    if not seal_id:
        found.append(ctx.finding(
            "seal-mismatch", ERROR, f"a {ev.action} on {ctx.item.code} names no seal id", [ev]))
    elif applied is None:
        known = ", ".join(sorted(s.seals)) or "none"
        found.append(ctx.finding(
            "seal-mismatch", ERROR,
            f"seal {seal_id} on {ctx.item.code} was never applied (seals applied: {known})",
            [*s.seals.values(), ev]))
    elif ev.action == "seal-checked" and (ev.details or {}).get("intact") is False:
        found.append(ctx.finding(
            "seal-broken", ERROR, f"seal {seal_id} on {ctx.item.code} found broken",
            [applied, ev]))
    elif ev.action == "seal-broken" and (s.pending is not None or s.shipped is not None):
        found.append(ctx.finding(
            "seal-broken", ERROR,
            f"seal {seal_id} on {ctx.item.code} broken before anyone received it",
            [applied, ev]))
    if ev.action == "seal-broken":
        s.seals.pop(seal_id, None)


_STEPS = {
    "release": _release, "receipt": _receipt, "store": _store, "shipped": _shipped,
    "seal-applied": _seal, "seal-checked": _seal, "seal-broken": _seal,
}


def walk_findings(ctx: ItemContext) -> list[Finding]:
    """double-custody, receipt-by-other, custody-gap, seal-broken, seal-mismatch."""
    found: list[Finding] = []
    for _, _, new in walk(ctx):
        found.extend(new)
    return found


#: kinds that must always be in someone's custody (containers follow what they hold)
SPECIMEN_KINDS = frozenset({
    ItemKind.PARTICLE, ItemKind.FRAGMENT, ItemKind.LAMELLA, ItemKind.WEDGE, ItemKind.NEEDLE,
    *CONTROL_KINDS})


def never_in_custody(ctx: ItemContext) -> list[Finding]:
    """custody-gap: a specimen or control that no custody event has ever reached."""
    if ctx.item.kind not in SPECIMEN_KINDS or custody_events(ctx):
        return []
    limit = timedelta(minutes=ctx.thresholds.custody_gap_minutes)
    if ctx.now - ctx.item.created_at <= limit:
        return []
    return [ctx.finding(
        "custody-gap", WARNING,
        f"no custodian has been recorded for {ctx.item.code} since it was registered "
        f"({ctx.item.created_at:%Y-%m-%d %H:%M} UTC)", [], at=ctx.item.created_at)]


def unreceived_transfer(ctx: ItemContext) -> list[Finding]:
    """A release (or shipment) that no receipt followed within the limit."""
    state = None
    for _, state, _ in walk(ctx):
        pass
    if state is None or state.pending is None:
        return []
    limit = timedelta(hours=ctx.thresholds.receipt_within_hours)
    if ctx.now - state.pending.occurred_at <= limit:
        return []
    to = state.pending.counterparty.name if state.pending.counterparty else "a recipient"
    return [ctx.finding(
        "unreceived-transfer", ERROR,
        f"{ctx.item.code} was handed to {to} on {state.pending.occurred_at:%Y-%m-%d %H:%M} UTC "
        f"and no receipt was ever recorded", [state.pending])]


def _laboratory(ev: Event) -> str:
    loc = ev.location
    return (loc.laboratory or loc.code) if loc is not None else ""


def location_conflict(ctx: ItemContext) -> list[Finding]:
    """A step logged at a laboratory where custody says the item is not, or an inventory
    check that did not find the item where the record says it is."""
    found = [ctx.finding(
        "location-conflict", ERROR,
        f"inventory check by {ev.actor.name} did not find {ctx.item.code} at "
        f"{ev.location.name if ev.location else 'its recorded place'}", [ev])
        for ev in (h.event for h in ctx.where_it_was())
        if ev.kind == "custody" and ev.action == "inventory-check"
        and (ev.details or {}).get("found") is False]
    custody = [h.event for h in ctx.current() if h.event.kind == "custody"
               and h.event.location_id is not None]
    for step in (e for e in ctx.own() if e.kind == "step" and e.location_id is not None):
        before = [c for c in custody if c.occurred_at <= step.occurred_at]
        if not before:
            continue
        last = before[-1]
        if _laboratory(last) != _laboratory(step):
            found.append(ctx.finding(
                "location-conflict", ERROR,
                f"{step.technique or 'step'} on {ctx.item.code} logged at {step.location.name} "
                f"({_laboratory(step)}) while custody places it at {last.location.name} "
                f"({_laboratory(last)})", [last, step], at=step.occurred_at))
    return found
