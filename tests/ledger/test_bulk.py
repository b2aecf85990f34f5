"""Bulk writes: the ledger entries they append are the ones a row-by-row write would make.

The reference for every state and hash is computed here independently: the rfc8785 package's
canonical JSON (RFC 8785) of the row and of the entry content, and hashlib's SHA-256
(FIPS 180-2), exactly as the ledger's format defines them.
"""

from __future__ import annotations

import hashlib
from datetime import UTC, datetime, timedelta, timezone
from itertools import pairwise
from typing import Any

import rfc8785
from sqlalchemy import Table, func, select
from sqlalchemy.orm import Session

from curation import ledger
from curation.model import Event, EventKind, Item, LedgerEntry
from tests.conftest import T0


def reference_state(table: Table, row: dict[str, Any]) -> str:
    return rfc8785.dumps(ledger.plain({c.name: row[c.name] for c in table.columns})).decode()


def reference_hash(entry: LedgerEntry) -> str:
    content = {"seq": entry.seq, "table": entry.table_name, "row": entry.row_id,
               "action": entry.action, "state": entry.state, "actor": entry.actor,
               "at": ledger.plain(entry.recorded_at), "prev": entry.prev_hash}
    return hashlib.sha256(rfc8785.dumps(content)).hexdigest()


def _columns(rows: list[dict[str, Any]]) -> dict[str, list[Any]]:
    return {name: [row[name] for row in rows] for name in rows[0]}


def _new_entries(session: Session, after: int) -> list[LedgerEntry]:
    return list(session.scalars(select(LedgerEntry).where(LedgerEntry.seq > after)
                                .order_by(LedgerEntry.seq)))


def _event_rows(session: Session, item: Item, actor_id: int, count: int) -> list[dict[str, Any]]:
    """Events with the values canonical JSON finds hardest, some sharing their objects."""
    first = (session.scalar(select(func.max(Event.id))) or 0) + 1
    shared = {"accelerating_voltage_kV": 5.0, "beam_current_nA": 0.5, "detector": "in_column"}
    odd = {"ratio": 1e21, "tiny": 1e-7, "zero": -0.0, "text": 'é "quoted" \u2028 \U0001f600',
           "list": [1, 2.5, None, True], "\u00f6\U0001f600": {"\ufb33": 1, "\U0001f600": 2}}
    at = datetime(2026, 3, 2, 10, 0, tzinfo=timezone(timedelta(hours=-3)))
    rows = []
    for k in range(count):
        row = {c.name: None for c in Event.__table__.columns}
        row.update(id=first + k, kind=EventKind.STEP.value if k % 2 else "custody",
                   item_id=item.id, actor_id=actor_id, occurred_at=at + timedelta(seconds=k),
                   recorded_at=T0, is_destructive=bool(k % 3), is_dose_reported=False,
                   summary="micro-\u00b5 sample " * (k % 2), note="",
                   details=[shared, odd, {}][k % 3], dose_rate_e_per_A2_s=[None, 0.1, 1e16][k % 3],
                   ended_at=at + timedelta(hours=1) if k % 4 == 0 else None)
        rows.append(row)
    return rows


def test_bulk_entries_match_the_reference_states_and_hashes(session, operator, make_item) -> None:
    item = make_item()
    session.flush()
    before = session.scalar(select(func.max(LedgerEntry.seq)))
    rows = _event_rows(session, item, operator.id, 40)
    ledger.insert_columns(session, Event.__table__, _columns(rows))
    entries = _new_entries(session, before)
    assert [e.row_id for e in entries] == [str(r["id"]) for r in rows]
    assert [e.state for e in entries] == [reference_state(Event.__table__, r) for r in rows]
    assert all(e.hash == reference_hash(e) for e in entries)
    assert entries[0].prev_hash == session.scalar(
        select(LedgerEntry.hash).where(LedgerEntry.seq == before))
    assert all(b.prev_hash == a.hash for a, b in pairwise(entries))
    assert ledger.verify(session).ok


def test_values_left_to_the_reference_are_still_written_alike(session, operator, make_item):
    # An enum member (handed to the reference, row by row) and a time with microseconds.
    item = make_item()
    session.flush()
    before = session.scalar(select(func.max(LedgerEntry.seq)))
    rows = _event_rows(session, item, operator.id, 3)
    rows[1]["kind"] = EventKind.HANDLING
    rows[2]["occurred_at"] = datetime(2026, 3, 2, 10, 0, 0, 123, tzinfo=UTC)
    ledger.insert_columns(session, Event.__table__, _columns(rows))
    entries = _new_entries(session, before)
    assert [e.state for e in entries] == [reference_state(Event.__table__, r) for r in rows]
    assert all(e.hash == reference_hash(e) for e in entries)
    assert ledger.verify(session).ok


def test_rows_of_several_tables_chain_in_the_order_given(session, operator, make_item) -> None:
    first, second = make_item(), make_item()
    session.flush()
    before = session.scalar(select(func.max(LedgerEntry.seq)))
    events = _event_rows(session, first, operator.id, 2)
    session.connection().execute(Event.__table__.insert(), events)
    items = Item.__table__
    item_rows = [dict(session.execute(select(items).where(items.c.id == i.id)).mappings().one())
                 for i in (first, second)]
    order = [(Event.__table__, "insert", events[0]), (items, "update", item_rows[0]),
             (items, "update", item_rows[1]), (Event.__table__, "insert", events[1])]
    ledger.append_rows(session, order)
    entries = _new_entries(session, before)
    assert [(e.table_name, e.action, e.row_id) for e in entries] == [
        (t.name, action, str(row["id"])) for t, action, row in order]
    assert [e.state for e in entries] == [reference_state(t, row) for t, _, row in order]
    assert all(e.hash == reference_hash(e) for e in entries)
    assert ledger.verify(session).ok


def test_nothing_to_write_writes_nothing(session, make_item) -> None:
    make_item()
    session.flush()
    before = session.scalar(select(func.max(LedgerEntry.seq)))
    ledger.insert_columns(session, Event.__table__, {c.name: [] for c in Event.__table__.columns})
    ledger.append_rows(session, [])
    assert session.scalar(select(func.max(LedgerEntry.seq))) == before
