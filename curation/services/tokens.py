"""Per-station API tokens: made once, shown once, stored only as their SHA-256."""

from __future__ import annotations

import hashlib
import hmac
import secrets
from dataclasses import dataclass

from sqlalchemy import select
from sqlalchemy.orm import Session, joinedload

from curation import ledger
from curation.db import utcnow
from curation.errors import NotFound, RuleViolation
from curation.model import ApiToken, Person, Station

#: marks our tokens in logs and secret scanners
PREFIX = "cur_"


@dataclass(frozen=True)
class NewToken:
    """The stored row and the token itself, which is never stored and never shown again."""

    row: ApiToken
    token: str


def digest(token: str) -> str:
    """Hex SHA-256 of a token, the only form kept in the database."""
    return hashlib.sha256(token.encode("utf-8", "surrogatepass")).hexdigest()


def create_token(session: Session, *, actor: Person | str, station: Station,
                 label: str = "") -> NewToken:
    """Make a token for a station's scripts; the caller shows `token` once."""
    ledger.attribute(session, actor)
    token = PREFIX + secrets.token_urlsafe(32)
    row = ApiToken(station_id=station.id, label=label.strip()[:200], token_sha256=digest(token))
    session.add(row)
    session.flush()
    return NewToken(row, token)


def revoke_token(session: Session, *, actor: Person | str, token_id: int) -> ApiToken:
    """Revoke a token by its id; a revoked token stays on record."""
    ledger.attribute(session, actor)
    row = session.get(ApiToken, token_id)
    if row is None:
        raise NotFound(f"no API token with id {token_id}")
    if row.revoked_at is not None:
        raise RuleViolation(f"API token {token_id} was already revoked at "
                            f"{row.revoked_at.isoformat()}")
    row.revoked_at = utcnow()
    session.flush()
    return row


def station_for(session: Session, token: str) -> Station | None:
    """The station a live token belongs to, or None for an unknown or revoked token."""
    wanted = digest(token)
    row = session.scalar(select(ApiToken).where(ApiToken.token_sha256 == wanted)
                         .options(joinedload(ApiToken.station)))
    # The lookup is by hash, so its timing says nothing about the token; compare in constant
    # time anyway so no code path ever compares secrets byte by byte.
    if row is None or not hmac.compare_digest(row.token_sha256, wanted):
        return None
    return row.station if row.revoked_at is None else None


def tokens_of(session: Session, station: Station | None = None) -> list[ApiToken]:
    """Every token (of one station, if given), oldest first, with its station."""
    query = select(ApiToken).options(joinedload(ApiToken.station)).order_by(ApiToken.id)
    if station is not None:
        query = query.where(ApiToken.station_id == station.id)
    return list(session.scalars(query))
