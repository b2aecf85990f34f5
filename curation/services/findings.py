"""Dispositions of audit findings: accepted with a reason, or fixed by a correction."""

from __future__ import annotations

from sqlalchemy.orm import Session

from curation import ledger
from curation.errors import InvalidInput
from curation.model import Decision, Disposition, Event, Item, Person
from curation.services.common import one_of


def dispose(session: Session, *, actor: Person, finding_key: str, code: str, item: Item,
            decision: str, reason: str, correction: Event | None = None) -> Disposition:
    """Record a decision on a finding; the finding stays visible with it."""
    ledger.attribute(session, actor)
    one_of("decision", decision, [d.value for d in Decision])
    if not reason.strip():
        raise InvalidInput("reason", reason, "a non-empty reason")
    if decision == Decision.FIXED and (correction is None or correction.supersedes_id is None):
        raise InvalidInput("correction", getattr(correction, "id", None),
                           "a correction event (one that supersedes another) that fixed it")
    if not finding_key.startswith(f"{code}:{item.id}:"):
        raise InvalidInput("finding_key", finding_key, f"a key of a {code} finding on {item.code}")
    disposition = Disposition(
        finding_key=finding_key, code=code, item_id=item.id, decision=decision,
        reason=reason.strip(), correction_id=correction.id if correction else None,
        actor_id=actor.id)
    session.add(disposition)
    session.flush()
    return disposition
