"""The hash-chained ledger: every write appends an entry in the same transaction.

Each flush of a session appends one entry per inserted or changed row, holding the row's
new state as canonical JSON (RFC 8785) and the SHA-256 of the entry chained to the previous
one. Deletes are refused: nothing is removed, a correction is a new row that supersedes an
old one. `verify` recomputes the chain and compares every domain row with its latest state.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from datetime import date, datetime, timezone
from decimal import Decimal
from enum import Enum
from typing import Any

import rfc8785
from sqlalchemy import Table, event, inspect, select, text
from sqlalchemy.orm import Session, UOWTransaction

from curation.db import Base, utcnow
from curation.errors import LedgerError
from curation.model import LedgerEntry, Person

GENESIS_HASH = "0" * 64
LEDGER_TABLE = LedgerEntry.__tablename__
ACTOR_KEY = "curation.actor"
#: the logged-in account of a web request; when set, every entry names it as the actor
AUTHENTICATED_KEY = "curation.authenticated"


#: the PostgreSQL advisory lock every writing transaction holds (any constant would do)
WRITER_LOCK = 0x6375726174696F6E  # "curation"
LOCKED_KEY = "curation.locked-transaction"


def attribute(session: Session, actor: Person | str) -> None:
    """Name who the session's next writes are by, and wait for the writers' turn.

    Every service calls this before it reads what it checks, so concurrent writers are
    serialised from that point: their checks see each other's committed rows and the ledger
    chain never forks. SQLite gets the same from BEGIN IMMEDIATE (see curation.db).
    """
    named = actor if isinstance(actor, str) else actor.username
    # The person who logged in answers for the write, whoever the form names as operator.
    session.info[ACTOR_KEY] = session.info.get(AUTHENTICATED_KEY) or named
    serialise_writers(session)


def serialise_writers(session: Session) -> None:
    """Hold the writers' lock until this transaction ends (PostgreSQL; once per transaction)."""
    if session.get_bind().dialect.name != "postgresql":
        return
    transaction = session.get_transaction()
    marker = id(transaction) if transaction is not None else None
    if marker is not None and session.info.get(LOCKED_KEY) == marker:
        return
    session.execute(text("SELECT pg_advisory_xact_lock(:key)"), {"key": WRITER_LOCK})
    session.info[LOCKED_KEY] = id(session.get_transaction())


def current_actor(session: Session) -> str:
    """Who the session writes as; refuses when nobody was named."""
    actor = session.info.get(ACTOR_KEY)
    if not actor:
        raise LedgerError("no actor named for this write: call ledger.attribute(session, actor)")
    return str(actor)


def plain(value: Any) -> Any:
    """A JSON-ready form of a column value; timestamps become UTC ISO 8601."""
    if isinstance(value, datetime):
        if value.tzinfo is None:
            value = value.replace(tzinfo=timezone.utc)
        return value.astimezone(timezone.utc).isoformat()
    if isinstance(value, date):
        return value.isoformat()
    if isinstance(value, Enum):
        return plain(value.value)
    if isinstance(value, Decimal):
        return float(value)
    if isinstance(value, bytes):
        return value.hex()
    if isinstance(value, Mapping):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [plain(v) for v in value]
    return value


def canonical(obj: Any) -> str:
    """RFC 8785 canonical JSON text of a plain object."""
    return rfc8785.dumps(plain(obj)).decode("utf-8")


def entry_hash(
    *, seq: int, table_name: str, row_id: str, action: str, state: str, actor: str,
    recorded_at: datetime, prev_hash: str,
) -> str:
    """SHA-256 (hex) over an entry's canonical content."""
    content = {
        "seq": seq, "table": table_name, "row": row_id, "action": action,
        "state": state, "actor": actor, "at": plain(recorded_at), "prev": prev_hash,
    }
    return hashlib.sha256(canonical(content).encode("utf-8")).hexdigest()


#: columns whose value the ledger keeps only as a SHA-256 digest (it is never erased, and a
#: password hash should not be readable by everyone who may read the ledger)
SECRET_COLUMNS = frozenset({("people", "password_hash")})


def _value(table: Table, name: str, value: Any) -> Any:
    if value is not None and (table.name, name) in SECRET_COLUMNS:
        return "sha256:" + hashlib.sha256(str(value).encode("utf-8")).hexdigest()
    return value


def row_state(table: Table, row: Mapping[str, Any]) -> str:
    """Canonical JSON of a row's columns, keyed by column name (secrets as digests)."""
    return canonical({c.name: _value(table, c.name, row[c.name]) for c in table.columns})


def row_key(table: Table, row: Mapping[str, Any]) -> str:
    """The ledger's id for a row: its primary key values joined by commas."""
    return ",".join(str(row[c.name]) for c in table.primary_key.columns)


def _last(session: Session) -> tuple[int, str]:
    last = session.execute(
        select(LedgerEntry.seq, LedgerEntry.hash).order_by(LedgerEntry.seq.desc()).limit(1)
    ).first()
    return (last.seq, last.hash) if last else (0, GENESIS_HASH)


def append_rows(session: Session, rows: list[tuple[Table, str, Mapping[str, Any]]]) -> None:
    """Append one entry per (table, action, row) in order, chained to the last entry."""
    if not rows:
        return
    actor = current_actor(session)
    serialise_writers(session)
    seq, prev = _last(session)
    entries = []
    for table, action, row in rows:
        seq += 1
        values = {
            "seq": seq, "table_name": table.name, "row_id": row_key(table, row),
            "action": action, "state": row_state(table, row), "actor": actor,
            "recorded_at": utcnow(), "prev_hash": prev,
        }
        prev = values["hash"] = entry_hash(**values)
        entries.append(values)
    session.connection().execute(LedgerEntry.__table__.insert(), entries)


def _object_row(obj: Any) -> tuple[Table, dict[str, Any]]:
    mapper = inspect(obj).mapper
    table = mapper.local_table
    row = {col.name: getattr(obj, prop.key) for prop in mapper.column_attrs
           for col in prop.columns if col.table is table}
    return table, row


@event.listens_for(Session, "before_flush")
def _refuse_deletes(session: Session, _ctx: UOWTransaction, _instances: Any) -> None:
    if session.deleted:
        names = ", ".join(sorted(repr(o) for o in session.deleted))
        raise LedgerError(f"records are never deleted; supersede them instead: {names}")


@event.listens_for(Session, "after_flush")
def _ledger_after_flush(session: Session, _ctx: UOWTransaction) -> None:
    changed = [(o, "insert") for o in session.new]
    changed += [(o, "update") for o in session.dirty if session.is_modified(o)]
    rows = [(table, action, row) for obj, action in changed
            if isinstance(obj, Base) and not isinstance(obj, LedgerEntry)
            for table, row in [_object_row(obj)]]
    # Inserts first, then by table and key, so the same flush always chains the same way.
    rows.sort(key=lambda r: (r[1] == "update", r[0].name, row_key(r[0], r[2]).zfill(20)))
    append_rows(session, rows)


@dataclass
class Problem:
    """One thing `verify` found wrong."""

    code: str
    message: str
    seq: int | None = None
    table: str | None = None
    row: str | None = None


@dataclass
class Verification:
    """What `verify` checked and found."""

    entries: int = 0
    rows: int = 0
    problems: list[Problem] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.problems

    @property
    def first_broken_seq(self) -> int | None:
        seqs = [p.seq for p in self.problems if p.seq is not None]
        return min(seqs) if seqs else None


def _check_chain(session: Session, result: Verification) -> dict[tuple[str, str], str]:
    latest: dict[tuple[str, str], str] = {}
    expected_seq, prev = 1, GENESIS_HASH
    rows = session.execute(select(LedgerEntry.__table__).order_by(LedgerEntry.seq))
    for entry in rows.mappings():
        result.entries += 1
        seq = entry["seq"]
        if seq != expected_seq:
            result.problems.append(Problem(
                "entry-missing" if seq > expected_seq else "entry-duplicated",
                f"entry {expected_seq} expected, found {seq}", seq=min(seq, expected_seq)))
        if entry["prev_hash"] != prev:
            result.problems.append(Problem(
                "chain-broken", f"entry {seq} does not follow the entry before it", seq=seq))
        fields = {k: entry[k] for k in (
            "seq", "table_name", "row_id", "action", "state", "actor", "recorded_at", "prev_hash")}
        if entry_hash(**fields) != entry["hash"]:
            result.problems.append(Problem(
                "entry-altered", f"entry {seq} does not match its hash", seq=seq,
                table=entry["table_name"], row=entry["row_id"]))
        latest[(entry["table_name"], entry["row_id"])] = entry["state"]
        expected_seq, prev = seq + 1, entry["hash"]
    return latest


def _domain_tables() -> Iterator[Table]:
    for table in Base.metadata.sorted_tables:
        if table.name != LEDGER_TABLE:
            yield table


def _check_rows(session: Session, result: Verification, latest: dict[tuple[str, str], str]) -> None:
    seen: set[tuple[str, str]] = set()
    for table in _domain_tables():
        for row in session.execute(select(table)).mappings():
            result.rows += 1
            key = (table.name, row_key(table, row))
            seen.add(key)
            recorded = latest.get(key)
            if recorded is None:
                result.problems.append(Problem(
                    "row-unrecorded", f"{table.name} row {key[1]} has no ledger entry",
                    table=table.name, row=key[1]))
            elif recorded != row_state(table, row) and not _same_but_newer(table, row, recorded):
                result.problems.append(Problem(
                    "row-differs", f"{table.name} row {key[1]} differs from its last ledger state",
                    table=table.name, row=key[1]))
    for table_name, row_id in sorted(set(latest) - seen):
        result.problems.append(Problem(
            "row-missing", f"{table_name} row {row_id} is in the ledger but not in the table",
            table=table_name, row=row_id))


#: values a column added by a later migration holds on rows written before it
_MIGRATION_DEFAULTS = (None, False, 0, "", {}, [])


def _same_but_newer(table: Table, row: Mapping[str, Any], recorded: str) -> bool:
    """True when the row matches its recorded state, columns added since holding defaults.

    A migration that adds a column changes no recorded state; the row is still intact if
    every recorded column matches and every newer column still holds an empty default.
    """
    state = json.loads(recorded)
    for column in table.columns:
        value = plain(_value(table, column.name, row[column.name]))
        if column.name in state:
            if canonical(state[column.name]) != canonical(value):
                return False
        elif value not in _MIGRATION_DEFAULTS:
            return False
    return True


def verify(session: Session) -> Verification:
    """Recompute the chain and compare every domain row with its latest ledger state."""
    result = Verification()
    latest = _check_chain(session, result)
    _check_rows(session, result, latest)
    return result
