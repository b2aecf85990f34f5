"""Writes about people and their logins."""

from __future__ import annotations

import secrets

from argon2 import PasswordHasher, Type
from argon2.exceptions import InvalidHashError, VerificationError
from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import ledger
from curation.db import utcnow
from curation.errors import CurationError, InvalidInput, RuleViolation
from curation.model import Person, Station


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


# ---- logins ---------------------------------------------------------------------------

ROLES = ("admin", "curator", "analyst", "station", "auditor")
#: Argon2id with OWASP's smallest recommended setting: 19 MiB, 2 passes, 1 lane
#: (OWASP Password Storage Cheat Sheet; RFC 9106 §4)
HASHER = PasswordHasher(time_cost=2, memory_cost=19 * 1024, parallelism=1, type=Type.ID)
#: one message for every refusal, so it never says whether the name or the password was wrong
REFUSED = "unknown username or wrong password"
_DECOY = HASHER.hash("not a password of anyone")


class LoginRefused(CurationError):
    """The username and password do not open an account."""


def set_password(session: Session, *, actor: Person | str, person: Person, password: str) -> None:
    """Store an Argon2id hash of `password` for `person` (12 characters at least)."""
    ledger.attribute(session, actor)
    if len(password) < 12:
        raise InvalidInput("password", "(hidden)", "at least 12 characters")
    person.password_hash = HASHER.hash(password)
    person.password_changed_at = utcnow()
    session.flush()


def create_account(session: Session, *, actor: Person | str, username: str, name: str,
                   role: str, password: str | None = None, station: Station | None = None
                   ) -> tuple[Person, str]:
    """Open a login for a new person; returns the person and the password (random if none)."""
    if role not in ROLES:
        raise InvalidInput("role", role, ", ".join(ROLES))
    if (role == "station") != (station is not None):
        raise RuleViolation("a station account needs a station, and only it may have one")
    person = add_person(session, actor=actor, username=username, name=name)
    person.role, person.station_id = role, station.id if station else None
    password = password or new_password()
    set_password(session, actor=actor, person=person, password=password)
    return person, password


def new_password() -> str:
    """A random password of about 120 bits, in characters people can type."""
    return secrets.token_urlsafe(15)


def disable(session: Session, *, actor: Person | str, person: Person) -> None:
    """Close the person's login (their records stay theirs)."""
    ledger.attribute(session, actor)
    person.is_active = False
    session.flush()


def reset(session: Session, *, actor: Person | str, person: Person) -> str:
    """Give the person a new random password, returned once, and open the login again."""
    if person.role is None:
        raise RuleViolation(f"{person.username} has no login to reset")
    password = new_password()
    set_password(session, actor=actor, person=person, password=password)
    person.is_active = True
    session.flush()
    return password


def authenticate(session: Session, username: str, password: str) -> Person:
    """The active account with this username and password, or LoginRefused."""
    person = session.scalar(select(Person).where(Person.username == username))
    stored = person.password_hash if person is not None and person.is_active and person.role \
        else None
    try:
        # An unknown name is checked against a decoy, so both refusals take as long.
        HASHER.verify(stored or _DECOY, password)
    except (VerificationError, InvalidHashError):
        raise LoginRefused(REFUSED) from None
    if person is None or stored is None:
        raise LoginRefused(REFUSED)
    if HASHER.check_needs_rehash(stored):
        # Parameters were raised since this hash was made: store a fresh one now we know it.
        set_password(session, actor=person, person=person, password=password)
    return person


def has_admin(session: Session) -> bool:
    """Whether any active admin account exists."""
    return session.scalar(select(Person.id).where(Person.role == "admin", Person.is_active)
                          .limit(1)) is not None
