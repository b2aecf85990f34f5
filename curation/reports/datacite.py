"""A DataCite 4.5 metadata record for one physical sample (the form behind IGSN identifiers).

Parent and child links are related identifiers (IsDerivedFrom / IsSourceOf); a sample used up
in analysis is still described, with its status stated. Items have no registered identifiers
yet, so links use our URN (`urn:curation:item-CODE`) and the label code is an alternate
identifier. The `datacite` package's validator checks structure but is loose on formats, so
`format_problems` checks those we rely on.
"""

from __future__ import annotations

import re
from typing import Any

from sqlalchemy import or_, select
from sqlalchemy.orm import Session, joinedload

from curation import history
from curation.model import AllocationItem, Derivation, Event, Item
from curation.reports.prov import NAMESPACE
from curation.services.common import item_by_code

SCHEMA = "http://datacite.org/schema/kernel-4"
GONE = {"consumed": "consumed in analysis (destroyed)", "lost": "lost",
        "returned": "returned to the lending facility"}


def urn(item: Item) -> str:
    """The sample's identifier in our namespace."""
    return f"{NAMESPACE}item-{item.code}"


def _link(item: Item, relation: str) -> dict[str, str]:
    return {"relatedIdentifier": urn(item), "relatedIdentifierType": "URN",
            "relationType": relation, "resourceTypeGeneral": "PhysicalObject"}


def _status(session: Session, item: Item) -> str:
    """The sample's status in words, with the step that used it up when there is one."""
    words = f"Status: {GONE.get(item.status, item.status)}."
    if item.status == "consumed":
        last = session.scalars(select(Event).where(
            Event.item_id == item.id, Event.kind == "step", Event.is_destructive)
            .order_by(Event.occurred_at.desc()).limit(1)).first()
        if last is not None:
            words += f" Last destructive step: {last.technique} on {last.occurred_at:%Y-%m-%d}."
    return words


def _organisation(session: Session, item: Item, ancestors: list[int]) -> str:
    """The lending facility of the item or its ancestors, else the place of its first step."""
    loan = session.scalars(select(AllocationItem).where(
        AllocationItem.item_id.in_([item.id, *ancestors]))
        .options(joinedload(AllocationItem.allocation))).first()
    if loan is not None:
        return loan.allocation.facility
    first = session.scalars(select(Event).where(Event.item_id == item.id)
                            .options(joinedload(Event.location))
                            .order_by(Event.occurred_at).limit(1)).first()
    return first.location.laboratory if first and first.location and \
        first.location.laboratory else "unknown"


def record(session: Session, code: str, publisher: str | None = None) -> dict[str, Any]:
    """The DataCite 4.5 record (JSON form) of the item with this code."""
    item = item_by_code(session, code)
    links = session.scalars(select(Derivation).where(or_(
        Derivation.child_id == item.id, Derivation.parent_id == item.id))
        .options(joinedload(Derivation.parent), joinedload(Derivation.child))
        .order_by(Derivation.derived_at, Derivation.id)).all()
    ancestors = [a for a, _, _ in history.ancestors(session, item.id)]
    organisation = _organisation(session, item, ancestors)
    out: dict[str, Any] = {
        "types": {"resourceTypeGeneral": "PhysicalObject", "resourceType": item.kind},
        "creators": [{"name": organisation, "nameType": "Organizational"}],
        "titles": [{"title": f"{item.kind.capitalize()} {item.code}"
                             + (f": {item.material}" if item.material else "")}],
        "publisher": {"name": publisher or organisation},
        "publicationYear": f"{item.created_at.year:04d}",
        "schemaVersion": SCHEMA,
        "alternateIdentifiers": [{"alternateIdentifier": item.code,
                                  "alternateIdentifierType": "Local sample code"}],
        "dates": [{"date": item.created_at.date().isoformat(), "dateType": "Created"}],
        "descriptions": [{"description": _status(session, item), "descriptionType": "Other"}],
        "relatedIdentifiers": [_link(d.parent, "IsDerivedFrom") for d in links
                               if d.child_id == item.id]
        + [_link(d.child, "IsSourceOf") for d in links if d.parent_id == item.id],
    }
    if item.description:
        out["descriptions"].insert(0, {"description": item.description,
                                       "descriptionType": "Abstract"})
    if item.mass_ug is not None:
        out["sizes"] = [f"{item.mass_ug:g} µg ({item.mass_method or 'method not given'})"]
    return out


def format_problems(rec: dict[str, Any]) -> list[str]:
    """Format checks the schema validator does not make."""
    problems = []
    if not re.fullmatch(r"\d{4}", str(rec.get("publicationYear", ""))):
        problems.append("publicationYear must be four digits")
    for d in rec.get("dates", []):
        if not re.fullmatch(r"\d{4}-\d{2}-\d{2}", str(d.get("date", ""))):
            problems.append(f"date {d.get('date')!r} is not YYYY-MM-DD")
    if not any(t.get("title", "").strip() for t in rec.get("titles", [])):
        problems.append("a title must not be empty")
    if rec.get("types", {}).get("resourceTypeGeneral") != "PhysicalObject":
        problems.append("resourceTypeGeneral must be PhysicalObject for a sample")
    return problems
