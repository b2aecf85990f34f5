"""The scenario's working state and the write helpers its sections share.

Every helper calls a service, so each row the demo writes has its ledger entry. Items,
people, places and stations are named by their codes (people by role) to keep the
sections readable.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import Any

from sqlalchemy.orm import Session

from curation.model import (
    Allocation,
    Event,
    Indicator,
    Item,
    Location,
    Person,
    Station,
    Study,
)
from curation.services import controls, custody, events, items, steps
from curation.services import environment as readings


def minutes(n: float) -> timedelta:
    """A duration in minutes."""
    return timedelta(minutes=n)


@dataclass(frozen=True)
class PlantedProblem:
    """A deliberate fault in the demo for the audits to find."""

    #: the finding code an audit would report
    code: str
    item_code: str
    #: the events that show the fault, oldest first
    event_ids: tuple[int, ...]
    description: str


class Scene:
    """What the scenario has written so far, by code, and helpers to write more."""

    def __init__(self, session: Session) -> None:
        self.session = session
        self.people: dict[str, Person] = {}
        self.places: dict[str, Location] = {}
        self.stations: dict[str, Station] = {}
        self.items: dict[str, Item] = {}
        self.problems: list[PlantedProblem] = []
        #: events a later section refers back to, by a short name
        self.marks: dict[str, Event] = {}
        #: (superseded event id, correcting event id)
        self.corrections: list[tuple[int, int]] = []
        self.study: Study | None = None
        self.allocation: Allocation | None = None
        #: every allocation by reference (the first one too)
        self.allocations: dict[str, Allocation] = {}
        #: steps recorded so far, numbering their submission keys
        self.submissions = 0
        #: the study's contamination indicators, by code
        self.indicators: dict[str, Indicator] = {}

    def _where(self, code: str | None) -> dict[str, Any]:
        """A station (which brings its location) or a bare location, by code."""
        if code is None:
            return {}
        if code in self.stations:
            return {"station": self.stations[code]}
        return {"location": self.places[code]}

    def register(self, role: str, code: str, kind: str, created_at: datetime,
                 **fields: Any) -> Item:
        """Register an item, recorded by the person in `role`."""
        item = items.register_item(self.session, actor=self.people[role], code=code, kind=kind,
                                   created_at=created_at, **fields)
        self.items[code] = item
        return item

    def event(self, role: str, kind: str, code: str, when: datetime, where: str | None,
              **fields: Any) -> Event:
        """Record any event on an item; `where` is a station or a location code."""
        return events.record_event(self.session, actor=self.people[role], kind=kind,
                                   item=self.items[code], occurred_at=when,
                                   **self._where(where), **fields)

    def step(self, role: str, code: str, technique: str, when: datetime, duration_min: float,
             where: str, details: dict[str, Any], *, summary: str = "") -> Event:
        """An instrument session of one technique at a station, validated, with its dose."""
        self.submissions += 1
        result = steps.record_step(
            self.session, actor=self.people[role], station=self.stations[where],
            technique=technique, items=[self.items[code]], occurred_at=when,
            ended_at=when + minutes(duration_min), raw_params=details,
            # a fixed key per step keeps the demo the same database every time
            submission_key=f"demo-step-{self.submissions:04d}", summary=summary)
        return result.events[0]

    def custody(self, role: str, code: str, action: str, when: datetime, where: str, *,
                to: str | None = None, details: dict[str, Any] | None = None) -> Event:
        """A custody event written as such (shipped, delivered); `to` is the counterparty's role."""
        counterparty = self.people[to] if to else None
        return self.event(role, "custody", code, when, where, action=action,
                          counterparty=counterparty, details=details)

    def release(self, giver: str, receiver: str, code: str, when: datetime, where: str) -> Event:
        """The custodian hands the item over to `receiver` (custody passes on receipt)."""
        return custody.release(self.session, actor=self.people[giver], item=self.items[code],
                               to=self.people[receiver], at=when, location=self.places[where])

    def receive(self, receiver: str, giver: str, code: str, when: datetime, where: str) -> Event:
        """The new custodian takes the item from `giver`."""
        return custody.receive(self.session, actor=self.people[receiver], item=self.items[code],
                               giver=self.people[giver], at=when, location=self.places[where])

    def hand_over(self, giver: str, receiver: str, code: str, when: datetime, from_where: str,
                  to_where: str) -> tuple[Event, Event]:
        """A hand-over as two events: the giver's release, the receiver's receipt 5 min later."""
        return (self.release(giver, receiver, code, when, from_where),
                self.receive(receiver, giver, code, when + minutes(5), to_where))

    def check_out(self, curator: str, operator: str, code: str, when: datetime, store: str,
                  where: str) -> None:
        """The curator hands an item from its store to an operator at an instrument."""
        self.hand_over(curator, operator, code, when, store, where)

    def check_in(self, operator: str, curator: str, code: str, when: datetime, where: str,
                 store: str, slot: str) -> Event:
        """The operator hands an item back and the curator stores it in a slot."""
        self.hand_over(operator, curator, code, when, where, store)
        return self.store(curator, code, when + minutes(10), store, slot)

    def store(self, role: str, code: str, when: datetime, where: str, slot: str) -> Event:
        """Put an item away in a numbered slot of a store."""
        return custody.store(self.session, actor=self.people[role], item=self.items[code],
                             location=self.places[where], at=when, slot=slot)

    def seal(self, role: str, code: str, action: str, seal_id: str, when: datetime,
             where: str) -> Event:
        """Apply, check (found intact) or break a tamper-evident seal."""
        return custody.seal(self.session, actor=self.people[role], item=self.items[code],
                            action=action, seal_id=seal_id, at=when, location=self.places[where])

    def reading(self, role: str, code: str, indicator: str, when: datetime, value: float,
                uncertainty: float, source: str) -> Event:
        """A control reading of one of the study's indicators."""
        return controls.record_control_reading(
            self.session, actor=self.people[role], indicator=self.indicators[indicator],
            control=self.items[code], measured_at=when, value=value, uncertainty=uncertainty,
            source=source)

    def handling(self, role: str, code: str, environment: str, start: datetime, end: datetime,
                 where: str, **conditions: Any) -> Event:
        """An exposure of an item to an environment, with O2/H2O, ISO class, what touched it."""
        return custody.handle(self.session, actor=self.people[role], item=self.items[code],
                              environment=environment, start=start, end=end,
                              location=self.places[where], **conditions)

    def atmosphere(self, role: str, where: str, when: datetime, o2_ppm: float,
                   h2o_ppm: float) -> None:
        """A glovebox's own O2/H2O reading, ppm."""
        readings.record_atmosphere(self.session, actor=self.people[role],
                                      location=self.places[where], measured_at=when,
                                      o2_ppm=o2_ppm, h2o_ppm=h2o_ppm, source="glovebox panel")

    def derive(self, role: str, parent: str, child: str, when: datetime, step: Event,
               removed_volume_um3: float | None) -> None:
        """Record that `child` was cut from `parent` by `step`."""
        items.derive(self.session, actor=self.people[role], parent=self.items[parent],
                     child=self.items[child], derived_at=when, step=step,
                     removed_volume_um3=removed_volume_um3)

    def place(self, role: str, code: str, container: str, when: datetime,
              position: str = "") -> None:
        """Place an item in a container (out of its current one, if any)."""
        items.move(self.session, actor=self.people[role], item=self.items[code],
                   container=self.items[container], moved_at=when, position=position)

    def take_out(self, role: str, code: str, when: datetime) -> None:
        """Take an item out of its container."""
        items.take_out(self.session, actor=self.people[role], item=self.items[code],
                       removed_at=when)

    def status(self, role: str, code: str, status: str) -> None:
        """Change an item's status."""
        items.set_status(self.session, actor=self.people[role], item=self.items[code],
                         status=status)

    def plant(self, code: str, item_code: str, found: list[Event], description: str) -> None:
        """Note a planted problem and the events that show it."""
        ids = tuple(e.id for e in sorted(found, key=lambda e: (e.occurred_at, e.id)))
        self.problems.append(PlantedProblem(code, item_code, ids, description))
