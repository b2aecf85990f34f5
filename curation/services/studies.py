"""Writes about studies and the items they cover."""

from __future__ import annotations

from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import ledger
from curation.errors import InvalidInput, RuleViolation
from curation.model import Item, Person, Study, StudyItem
from curation.services.common import one_of


def create_study(
    session: Session, *, actor: Person | str, code: str, title: str, lead: Person | None = None,
    rules: dict[str, Any] | None = None, description: str = "",
) -> Study:
    """Open an analysis campaign with its rules."""
    ledger.attribute(session, actor)
    if not code.strip():
        raise InvalidInput("code", code, "a non-empty study code")
    if session.scalar(select(Study.id).where(Study.code == code)) is not None:
        raise RuleViolation(f"study code {code!r} is already in use")
    study = Study(code=code, title=title, lead_id=lead.id if lead else None,
                  rules=dict(rules or {}), description=description)
    session.add(study)
    session.flush()
    return study


def enrol(
    session: Session, *, actor: Person | str, study: Study, item: Item, role: str = "specimen"
) -> StudyItem:
    """Enrol an item in a study as a specimen or a control."""
    ledger.attribute(session, actor)
    one_of("role", role, ["specimen", "control"])
    if session.scalar(select(StudyItem.id).where(
            StudyItem.study_id == study.id, StudyItem.item_id == item.id)) is not None:
        raise RuleViolation(f"{item.code} is already in study {study.code}")
    link = StudyItem(study_id=study.id, item_id=item.id, role=role)
    session.add(link)
    session.flush()
    return link
