"""The lineage as a W3C PROV document (PROV-DM, serialised as PROV-JSON by the `prov` library).

Items are entities, steps and custody hand-overs are activities, people, instruments and the
laboratories are agents. Derivation, generation, usage and association carry their times.
Every `prov:type` is a qualified name in our namespace or PROV's. The `prov` library does not
check that an activity ends after it starts, so `document` does and refuses one that does not.
"""

from __future__ import annotations

import re

from prov.model import PROV, Namespace, ProvDocument
from sqlalchemy.orm import Session

from curation.errors import InvalidInput
from curation.model import Event, Item
from curation.reports.lineage import LineageReport, build

#: our namespace; the URN keeps identifiers stable whatever host serves the database
NAMESPACE = "urn:curation:"
#: custody actions that move an item between custodians or places
HANDOVER_ACTIONS = frozenset({"release", "receipt", "shipped", "delivered"})


def _slug(text: str) -> str:
    """A local name safe in a qualified name."""
    return re.sub(r"[^A-Za-z0-9._-]+", "_", text).strip("_") or "unnamed"


def _kind(text: str) -> str:
    """A type name from a kind or technique: "fib-liftout" -> "FibLiftout"."""
    return "".join(part.capitalize() for part in re.split(r"[^A-Za-z0-9]+", text) if part)


def check_times(ev: Event) -> None:
    """Refuse an activity that ends before it starts (PROV tools do not check it)."""
    if ev.ended_at is not None and ev.ended_at < ev.occurred_at:
        raise InvalidInput("ended_at", ev.ended_at.isoformat(),
                           f"at or after the start {ev.occurred_at.isoformat()} (event {ev.id})")


class _Builder:
    """Adds records once each, naming them in the `cur` namespace."""

    def __init__(self) -> None:
        self.doc = ProvDocument()
        self.ns: Namespace = self.doc.add_namespace("cur", NAMESPACE)
        self.seen: set[str] = set()

    def entity(self, item: Item) -> str:
        name = f"cur:item-{_slug(item.code)}"
        if name not in self.seen:
            self.seen.add(name)
            self.doc.entity(name, {"prov:type": self.ns[_kind(item.kind)],
                                   "prov:label": item.code, "cur:status": item.status,
                                   "cur:material": item.material or ""})
        return name

    def agent(self, key: str, label: str, kind: object) -> str:
        name = f"cur:{key}"
        if name not in self.seen:
            self.seen.add(name)
            self.doc.agent(name, {"prov:type": kind, "prov:label": label})
        return name

    def activity(self, ev: Event, kind: str) -> str:
        check_times(ev)
        name = f"cur:event-{ev.id}"
        if name not in self.seen:
            self.seen.add(name)
            label = ev.technique or ev.action or ev.kind
            self.doc.activity(name, ev.occurred_at, ev.ended_at or ev.occurred_at,
                              {"prov:type": self.ns[kind], "prov:label": label,
                               "cur:technique": ev.technique or "", "cur:action": ev.action or ""})
            self._agents(name, ev)
            self.doc.used(name, self.entity(ev.item), ev.occurred_at)
        return name

    def _agents(self, activity: str, ev: Event) -> None:
        person = self.agent(f"person-{_slug(ev.actor.username)}", ev.actor.name, PROV["Person"])
        self.doc.wasAssociatedWith(activity, person)
        instrument = ev.station.instrument if ev.station is not None else None
        if instrument is not None:
            self.doc.wasAssociatedWith(activity, self.agent(
                f"instrument-{_slug(instrument.code)}", instrument.name,
                self.ns["Instrument"]))
        place = ev.location or (ev.station.location if ev.station else None)
        if place is not None and place.laboratory:
            lab = self.agent(f"lab-{_slug(place.laboratory)}", place.laboratory,
                             PROV["Organization"])
            key = f"{person}>{lab}"
            if key not in self.seen:
                self.seen.add(key)
                self.doc.actedOnBehalfOf(person, lab)


def document(report: LineageReport) -> ProvDocument:
    """The PROV document of a lineage report."""
    b = _Builder()
    for node in report.tree:
        b.entity(node.item)
    for row in report.steps:
        if not row.superseded:
            b.activity(row.event, "Step")
    for ev in report.custody:
        if ev.action in HANDOVER_ACTIONS:
            b.activity(ev, "HandOver")
    by_id = {n.item.id: n.item for n in report.tree}
    for child_id, d in sorted(report.derivations.items()):
        child, parent = b.entity(by_id[child_id]), b.entity(by_id[d.parent_id])
        step = f"cur:event-{d.step_id}" if d.step_id is not None else None
        if step is not None and step in b.seen:
            b.doc.wasGeneratedBy(child, step, d.derived_at)
            b.doc.wasDerivedFrom(child, parent, activity=step)
        else:
            b.doc.wasDerivedFrom(child, parent)
    return b.doc


def export(session: Session, code: str) -> str:
    """PROV-JSON of the lineage of the particle `code` belongs to."""
    return str(document(build(session, code)).serialize(format="json", indent=2))

