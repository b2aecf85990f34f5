"""Findings, thresholds and the per-item context every rule reads."""

from __future__ import annotations

from dataclasses import dataclass, field, fields, replace
from datetime import datetime
from typing import Any

from curation.audit import exposure
from curation.history import HistoryEntry
from curation.model import Derivation, EnvironmentReading, Event, Indicator, Item
from curation.techniques import Dose

ERROR, WARNING = "error", "warning"


@dataclass(frozen=True)
class Finding:
    """One problem found on one item, with the events that show it."""

    code: str
    severity: str
    item_id: int
    item_code: str
    message: str
    evidence: tuple[int, ...] = ()
    at: datetime | None = None

    @property
    def key(self) -> str:
        """A stable identity, so a disposition can name the finding it answers."""
        return f"{self.code}:{self.item_id}:{','.join(map(str, self.evidence))}"


@dataclass(frozen=True)
class Thresholds:
    """Limits the rules apply; a study's `rules` override the defaults by name."""

    #: a release not received within this many hours is an unreceived transfer
    receipt_within_hours: float = 24.0
    #: longest time an item may sit with nobody answerable for it
    custody_gap_minutes: float = 60.0
    #: a station clock ahead of the server by more than this is clock skew
    clock_ahead_minutes: float = 5.0
    #: recorded this long after it happened is clock skew too (None: not checked)
    late_entry_hours: float | None = None
    #: glovebox atmosphere limits, ppm (common practice: purified N2 boxes hold < 1 ppm)
    max_o2_ppm: float = 5.0
    max_h2o_ppm: float = 5.0
    #: the worst cleanroom class the study accepts (None: no requirement)
    required_iso_class: float | None = None
    #: budgets over the effective history (None: the study sets no limit)
    max_air_minutes: float | None = None
    max_electron_dose_e_per_A2: float | None = None
    #: one acquisition's electron dose (None: the default of the item's material class)
    max_electron_dose_per_acquisition_e_per_A2: float | None = None
    max_ion_fluence_ions_per_cm2: float | None = None
    max_xray_s: float | None = None
    max_temperature_K: float | None = None
    #: order rules: techniques in the order they must run; electron dose allowed before APT;
    #: analyses a carbon coat spoils; flag a Ga-beam step before (trace-element) APT
    technique_order: tuple[str, ...] | list[str] = ()
    max_electron_dose_before_apt_e_per_A2: float | None = None
    carbon_analysis_techniques: tuple[str, ...] | list[str] = ()
    flag_ga_before_apt: bool = False
    #: mass conservation holds within this many standard uncertainties
    mass_coverage_factor: float = 2.0

    @classmethod
    def from_rules(cls, rules: dict[str, Any] | None) -> Thresholds:
        """Defaults overridden by the matching keys of a study's rules."""
        known = {f.name for f in fields(cls)}
        chosen = {k: v for k, v in (rules or {}).items() if k in known}
        return replace(cls(), **chosen)


@dataclass
class ItemContext:
    """What the rules read about one item: its effective history and thresholds."""

    item: Item
    history: list[HistoryEntry]
    thresholds: Thresholds
    now: datetime
    #: derivations making this item: (parent item, derived_at)
    parents: list[tuple[Item, datetime]] = field(default_factory=list)
    #: event ids that a later correction supersedes
    superseded: set[int] = field(default_factory=set)
    #: glovebox atmosphere readings by location id, oldest first
    readings: dict[int, list[EnvironmentReading]] = field(default_factory=dict)
    #: indicators of the item's studies by id (for a control's readings)
    indicators: dict[int, Indicator] = field(default_factory=dict)
    #: the item is in a study that has a control set
    has_control_set: bool = False
    #: a control is linked to travel with the item
    travels_with_control: bool = False
    #: handling events a control is linked to
    linked_events: set[int] = field(default_factory=set)
    #: derivations cutting children from this item, with the children
    children: list[tuple[Derivation, Item]] = field(default_factory=list)
    #: ancestor ids, nearest first (the whole graph of derivations)
    ancestors: list[int] = field(default_factory=list)
    #: each step's dose by event id, shared by the contexts of one batch (an ancestor's step
    #: reaches every descendant, and its dose is worked out once)
    doses: dict[int, Dose | None] = field(default_factory=dict, repr=False)
    #: the views below, worked out once (every rule reads them; the context is read-only)
    _memo: dict[str, Any] = field(default_factory=dict, repr=False, compare=False)

    def current(self) -> list[HistoryEntry]:
        """The history without events a correction has superseded."""
        if "current" not in self._memo:
            self._memo["current"] = [h for h in self.history
                                     if h.event.id not in self.superseded]
        return self._memo["current"]

    def own(self) -> list[Event]:
        """Events on the item itself, corrections applied."""
        if "own" not in self._memo:
            self._memo["own"] = [h.event for h in self.current() if h.reach == "own"]
        return self._memo["own"]

    def where_it_was(self) -> list[HistoryEntry]:
        """Events on the item or on a container it sat in (not its ancestors')."""
        if "where" not in self._memo:
            self._memo["where"] = [h for h in self.current()
                                   if h.reach in ("own", "container")]
        return self._memo["where"]

    def dose(self, ev: Event) -> Dose | None:
        """The dose a step delivered (`exposure.event_dose`), worked out once per batch."""
        if ev.id not in self.doses:
            self.doses[ev.id] = exposure.event_dose(ev)
        return self.doses[ev.id]

    def budget(self) -> exposure.Budget:
        """The exposure and dose budget over the current history, worked out once."""
        if "budget" not in self._memo:
            self._memo["budget"] = exposure.budget(self.current(), self.dose)
        return self._memo["budget"]

    def finding(self, code: str, severity: str, message: str, evidence: list[Event],
                at: datetime | None = None) -> Finding:
        """A finding on this item with events as evidence."""
        ids = tuple(e.id for e in evidence)
        when = at or (evidence[-1].occurred_at if evidence else None)
        return Finding(code, severity, self.item.id, self.item.code, message, ids, when)
