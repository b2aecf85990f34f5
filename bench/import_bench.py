"""`curation import events` against raw `executemany` of the same rows, pre-hashed."""

from __future__ import annotations

import json
from datetime import datetime, timedelta, timezone
from typing import Any

from common import Result, Size, best_of
from sqlalchemy import Engine, select

from curation.db import make_sessionmaker
from curation.model import Event, Item, LedgerEntry
from curation.services import imports
from curation.services.common import person_by_username

GOAL = 2.5
START = datetime(2032, 5, 3, 9, 0, tzinfo=timezone(timedelta(hours=2)))
SEM = {"accelerating_voltage_kV": 5, "beam_current_nA": 0.5, "detector": "secondary_electron"}


def lines(codes: list[str], n: int) -> str:
    """n JSON lines of events over the given items: steps, custody and handling in turn."""
    out = []
    for k in range(n):
        row: dict[str, Any] = {"item": codes[k % len(codes)],
                               "occurred_at": (START + timedelta(minutes=k)).isoformat()}
        if k % 3 == 0:
            row.update(kind="step", technique="sem-imaging", details=SEM)
        elif k % 3 == 1:
            row.update(kind="custody", action="inventory-check")
        else:
            row.update(kind="handling", environment="n2-glovebox")
        out.append(json.dumps(row))
    return "\n".join(out)


def _through_app(engine: Engine, text: str, operator: str, keep: bool = False
                 ) -> dict[str, list[tuple[Any, ...]]]:
    """Import in one transaction (reading back what it wrote when `keep`), roll back."""
    with make_sessionmaker(engine)() as session:
        first = session.scalar(select(Event.id).order_by(Event.id.desc()).limit(1)) or 0
        seq = session.scalar(select(LedgerEntry.seq).order_by(LedgerEntry.seq.desc()).limit(1))
        imports.import_events(session, actor=person_by_username(session, operator),
                              rows=imports.read_rows(text, "jsonl"))
        conn = session.connection()
        written = {} if not keep else {
            "events": [tuple(r) for r in conn.execute(
                select(Event.__table__).where(Event.id > first).order_by(Event.id))],
            "ledger": [tuple(r) for r in conn.execute(
                select(LedgerEntry.__table__).where(LedgerEntry.seq > seq))],
        }
        session.rollback()
    return written


def _raw_insert(engine: Engine, written: dict[str, list[tuple[Any, ...]]]) -> None:
    """The same rows through the driver's executemany, then roll back."""
    events, entries = Event.__table__, LedgerEntry.__table__
    marks = "%s" if engine.dialect.name == "postgresql" else "?"
    quote = engine.dialect.identifier_preparer.quote
    conn = engine.raw_connection()
    try:
        cursor = conn.cursor()
        for table, rows in ((events, written["events_raw"]), (entries, written["ledger_raw"])):
            names = ", ".join(quote(c.name) for c in table.columns)
            places = ", ".join([marks] * len(table.columns))
            cursor.executemany(f"INSERT INTO {table.name} ({names}) VALUES ({places})", rows)
        conn.rollback()
    finally:
        conn.close()


def _driver_values(engine: Engine, written: dict[str, list[tuple[Any, ...]]]) -> None:
    """Rows as the driver takes them (UTC timestamps, JSON as text), made before timing."""
    for key, table in (("events", Event.__table__), ("ledger", LedgerEntry.__table__)):
        procs = [c.type._cached_bind_processor(engine.dialect) for c in table.columns]
        written[f"{key}_raw"] = [tuple(p(v) if p else v for p, v in zip(procs, row))
                                 for row in written[key]]


def run(engine: Engine, size: Size, operator: str) -> list[Result]:
    """Import size.import_events events both ways, best of the repeats."""
    with make_sessionmaker(engine)() as session:
        codes = list(session.scalars(select(Item.code).order_by(Item.id).limit(500)))
    text = lines(codes, size.import_events)
    written = _through_app(engine, text, operator, keep=True)
    _driver_values(engine, written)
    value = best_of(size.repeats, lambda: _through_app(engine, text, operator))
    baseline = best_of(size.repeats, lambda: _raw_insert(engine, written))
    return [Result(f"import: {size.import_events} events (checks, ledger hashing) vs raw "
                   "executemany", engine.dialect.name, value, baseline, GOAL)]
