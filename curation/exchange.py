"""A whole database as one JSON document, and back: every table, the ledger included.

The document is a copy, not new work: importing it writes the rows as they were (ids, times,
ledger entries), into an empty database at the same schema revision, and `ledger.verify`
must then pass exactly as it did on the source.
"""

from __future__ import annotations

import json
from datetime import datetime
from typing import Any

from sqlalchemy import DateTime, Integer, func, select, text
from sqlalchemy.orm import Session

from curation.db import Base, UTCDateTime
from curation.errors import InvalidInput, RuleViolation
from curation.ledger import plain

FORMAT = "curation-database/1"


def export_document(session: Session) -> dict[str, Any]:
    """Every table's rows (ordered by key) with the schema revision they belong to."""
    tables = {}
    for table in Base.metadata.sorted_tables:
        order = list(table.primary_key.columns)
        rows = session.execute(select(table).order_by(*order)).mappings()
        tables[table.name] = [{k: plain(v) for k, v in row.items()} for row in rows]
    return {"format": FORMAT, "revision": _revision(session), "tables": tables}


def _revision(session: Session) -> str | None:
    return session.execute(text("SELECT version_num FROM alembic_version")).scalar()


def export_json(session: Session) -> str:
    """The export as JSON text."""
    return json.dumps(export_document(session), ensure_ascii=False, indent=1)


def _typed(table_name: str, column: Any, value: Any) -> Any:
    if value is None:
        return None
    if isinstance(column.type, UTCDateTime | DateTime):
        try:
            return datetime.fromisoformat(value)
        except (TypeError, ValueError):
            raise InvalidInput(f"{table_name}.{column.name}", value, "an ISO 8601 timestamp") from None
    return value


def import_document(session: Session, document: dict[str, Any]) -> dict[str, int]:
    """Write an exported database into this empty one; returns the row counts by table."""
    if document.get("format") != FORMAT:
        raise InvalidInput("format", document.get("format"), FORMAT)
    if document.get("revision") != _revision(session):
        raise InvalidInput("revision", document.get("revision"),
                           f"the schema revision of this database, {_revision(session)} "
                           "(run `curation init` on both first)")
    tables = document.get("tables") or {}
    unknown = sorted(set(tables) - set(Base.metadata.tables))
    if unknown:
        raise InvalidInput("tables", unknown, "tables of this schema revision")
    for table in Base.metadata.sorted_tables:
        if session.scalar(select(func.count()).select_from(table)):
            raise RuleViolation(f"the database is not empty ({table.name} has rows); "
                                "import into a new database")
    counts = {}
    for table in Base.metadata.sorted_tables:
        rows = [{c.name: _typed(table.name, c, row.get(c.name)) for c in table.columns}
                for row in tables.get(table.name, [])]
        if rows:
            session.execute(table.insert(), rows)
        counts[table.name] = len(rows)
    _advance_sequences(session)
    return counts


def _advance_sequences(session: Session) -> None:
    """PostgreSQL: move each id sequence past the ids just written."""
    if session.get_bind().dialect.name != "postgresql":
        return
    for table in Base.metadata.sorted_tables:
        keys = list(table.primary_key.columns)
        if len(keys) == 1 and isinstance(keys[0].type, Integer) and keys[0].autoincrement is not False:
            session.execute(text(
                f"SELECT setval(pg_get_serial_sequence('{table.name}', '{keys[0].name}'), "
                f"COALESCE((SELECT MAX({keys[0].name}) FROM {table.name}), 0) + 1, false)"))
