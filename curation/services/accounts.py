"""Writes about people."""

from __future__ import annotations

from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import ledger
from curation.errors import InvalidInput, RuleViolation
from curation.model import Person


def add_person(
    session: Session, *, actor: Person | str, username: str, name: str, affiliation: str = ""
) -> Person:
    """Register a person who handles, holds or records items."""
    ledger.attribute(session, actor)
    if not username or not username.strip() or " " in username:
        raise InvalidInput("username", username, "a non-empty name without spaces")
    if session.scalar(select(Person.id).where(Person.username == username)) is not None:
        raise RuleViolation(f"username {username!r} is already taken")
    person = Person(username=username, name=name, affiliation=affiliation)
    session.add(person)
    session.flush()
    return person
