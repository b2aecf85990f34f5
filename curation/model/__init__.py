"""The typed tables; importing this package registers all of them on Base.metadata."""

from curation.db import Base
from curation.model.accounts import Person
from curation.model.allocations import (
    Allocation, AllocationItem, AllocationMember, AllocationOutput, AllocationReport,
    AllocationReturn,
)
from curation.model.controls import ControlLink, Indicator
from curation.model.environment import EnvironmentReading, ReadingKind
from curation.model.events import Event, EventKind
from curation.model.files import DataFile, Image
from curation.model.findings import Decision, Disposition
from curation.model.items import (
    CONTROL_KINDS,
    Derivation,
    Item,
    ItemKind,
    ItemStatus,
    Method,
    Placement,
)
from curation.model.ledger_entries import LedgerEntry
from curation.model.stations import ApiToken, Instrument, Location, LocationKind, Station
from curation.model.studies import Study, StudyItem

__all__ = [
    "CONTROL_KINDS",
    "ControlLink",
    "Allocation",
    "ApiToken",
    "AllocationItem",
    "AllocationMember",
    "AllocationOutput",
    "AllocationReport",
    "AllocationReturn",
    "Base",
    "DataFile",
    "Decision",
    "Derivation",
    "Disposition",
    "EnvironmentReading",
    "Event",
    "EventKind",
    "Image",
    "Indicator",
    "Instrument",
    "Item",
    "ItemKind",
    "ItemStatus",
    "LedgerEntry",
    "Location",
    "LocationKind",
    "Method",
    "Person",
    "Placement",
    "ReadingKind",
    "Station",
    "Study",
    "StudyItem",
]
