"""The full audit against a raw `fetchmany` scan of the same events, and its peak memory."""

from __future__ import annotations

import tracemalloc

from common import Result, Size, best_of, fresh_engine, populate
from sqlalchemy import Engine

from curation.audit import engine as audit_engine
from curation.db import make_sessionmaker

GOAL, MEMORY_GOAL = 2.0, 1.5
SCAN = ("SELECT e.id, e.item_id, e.kind, e.occurred_at, e.recorded_at, e.action, "
        "e.environment, e.technique, i.code FROM events e JOIN items i ON i.id = e.item_id "
        "ORDER BY e.item_id, e.occurred_at, e.id")


def full_audit(engine: Engine) -> int:
    """Every finding over every item, consumed as it streams out."""
    with make_sessionmaker(engine)() as session:
        return sum(1 for _ in audit_engine.audit(session))


def raw_scan(engine: Engine) -> int:
    """One ordered pass over the events with the per-row work of the cheapest rules:
    clock skew against the server clock, and events out of order per item."""
    conn = engine.raw_connection()
    found, last_item, last_recorded = 0, None, None
    try:
        cursor = conn.cursor()
        cursor.execute(SCAN)
        while rows := cursor.fetchmany(1000):
            for row in rows:
                occurred, recorded = str(row[3]), str(row[4])
                found += occurred > recorded
                if row[1] == last_item and last_recorded is not None and recorded < last_recorded:
                    found += 1
                last_item, last_recorded = row[1], recorded
        cursor.close()
    finally:
        conn.close()
    return found


def peak(engine: Engine) -> int:
    """Peak traced allocation (bytes) over one full audit, after a first run has filled the
    engine's statement caches (both sizes are measured warm, so the figure is the audit's)."""
    full_audit(engine)
    tracemalloc.start()
    try:
        full_audit(engine)
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def run(backend: str, size: Size) -> list[Result]:
    """Time at 1x; peak memory at 1x and at 10x the events."""
    small = fresh_engine(backend, "audit")
    populate(small, size.audit_particles, 0)
    value = best_of(max(size.repeats // 2, 1), lambda: full_audit(small))
    baseline = best_of(size.repeats, lambda: raw_scan(small))
    at_1 = peak(small)
    small.dispose()
    large = fresh_engine(backend, "audit10")
    populate(large, size.audit_particles * 10, 0)
    at_10 = peak(large)
    large.dispose()
    name = backend
    return [
        Result("audit: full audit vs raw fetchmany scan", name, value, baseline, GOAL),
        Result("audit: peak memory at 10x events vs 1x", name, at_10 / 2**20, at_1 / 2**20,
               MEMORY_GOAL, unit="MiB"),
    ]


