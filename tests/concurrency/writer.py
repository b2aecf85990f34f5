"""A writer process for the concurrency and crash tests (run as a script, not collected).

usage: writer.py URL MODE COUNT ACKFILE
  MODE "count": each transaction reads how many marks the coupon has and records the next
                number (a read-modify-write that a lost update would duplicate).
  MODE "forever": records marks until killed, acknowledging each after its commit.
An acknowledgement is one line "EVENT_ID TOKEN" appended and fsynced only after the commit
returned, so every acknowledged write must survive a kill.
"""

from __future__ import annotations

import os
import sys
import uuid
from datetime import datetime, timezone
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from sqlalchemy import func, select  # noqa: E402

from curation import ledger  # noqa: E402
from curation.db import make_engine, make_sessionmaker  # noqa: E402
from curation.model import Event  # noqa: E402
from curation.services import common, events  # noqa: E402

COUPON, OPERATOR = "CC-COUPON", "cc-writer"


def mark(session, coupon, person) -> tuple[int, str]:  # type: ignore[no-untyped-def]
    """One mark on the coupon, numbered after the marks already there."""
    ledger.attribute(session, person)  # the writers' turn starts here, before the read
    seen = session.scalar(select(func.count()).select_from(Event).where(
        Event.item_id == coupon.id, Event.action == "mark"))
    token = uuid.uuid4().hex
    event = events.record_event(session, actor=person, kind="custody", item=coupon,
                                occurred_at=datetime.now(timezone.utc), action="mark",
                                details={"n": seen + 1, "token": token, "pid": os.getpid()})
    return event.id, token


def main(url: str, mode: str, count: int, ackfile: str) -> None:
    engine = make_engine(url)
    sessions = make_sessionmaker(engine)
    done = 0
    with open(ackfile, "a", encoding="utf-8") as ack:
        while mode == "forever" or done < count:
            with sessions() as session:
                coupon = common.item_by_code(session, COUPON)
                person = common.person_by_username(session, OPERATOR)
                event_id, token = mark(session, coupon, person)
                session.commit()
            ack.write(f"{event_id} {token}\n")
            ack.flush()
            os.fsync(ack.fileno())
            done += 1
    engine.dispose()


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2], int(sys.argv[3]), sys.argv[4])
