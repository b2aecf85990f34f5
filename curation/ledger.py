"""The hash-chained ledger: every write appends an entry in the same transaction.

Each flush of a session appends one entry per inserted or changed row, holding the row's
new state as canonical JSON (RFC 8785) and the SHA-256 of the entry chained to the previous
one. Deletes are refused: nothing is removed, a correction is a new row that supersedes an
old one. `verify` recomputes the chain and compares every domain row with its latest state.
Bulk writes use `insert_columns`: one executemany, the entries worked out column by column.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from itertools import groupby, repeat
from operator import itemgetter
from typing import Any

from sqlalchemy import Table, event, inspect, select, text
from sqlalchemy.orm import Session, UOWTransaction

from curation.canonical import (
    SAFE_INT,
    Unusual,
    canonical,
    encode,
    encode_column,
    plain,
    string,
    utf16,
)
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


#: rows given column by column: every column's name and its values, one per row
Columns = Mapping[str, Sequence[Any]]


def _columns(table: Table, rows: Sequence[Mapping[str, Any]]) -> dict[str, Sequence[Any]]:
    """Rows as Columns."""
    names = [c.name for c in table.columns]
    values = itemgetter(*names) if len(names) > 1 else lambda row: (row[names[0]],)
    return dict(zip(names, zip(*map(values, rows))))


def _states(table: Table, columns: Columns) -> list[str]:
    """row_state of each row, worked out column by column (see canonical.encode_column)."""
    names = sorted((c.name for c in table.columns), key=utf16)  # RFC 8785 key order
    try:
        pieces: list[Iterable[str]] = []
        for i, name in enumerate(names):
            values = columns[name]
            if (table.name, name) in SECRET_COLUMNS:
                values = [_value(table, name, v) for v in values]
            pieces += [repeat(("," if i else "{") + encode(str(name)) + ":"),
                       encode_column(values)]
    except Unusual:
        return [row_state(table, dict(zip(names, row)))
                for row in zip(*(columns[n] for n in names))]
    return list(map("".join, zip(*pieces, repeat("}"))))


def _hashes(first_seq: int, prev: str, table: Table, action: str, actor: str, now: datetime,
            row_ids: list[str], states: list[str]) -> list[str]:
    """entry_hash of consecutive entries, with what they share encoded once."""
    seqs = range(first_seq, first_seq + len(states))
    try:
        head = (f'{{"action":{encode(action)},"actor":{encode(actor)},'
                f'"at":{encode(plain(now))},"prev":')
        table_json = encode(str(table.name)).replace("{", "{{").replace("}", "}}")
        tail = ',"row":{},"seq":{},"state":{},"table":' + table_json + "}}"
        if seqs[-1] > SAFE_INT:
            raise Unusual
        # states are canonical text: no control characters or lone surrogates to refuse
        tails = list(map(tail.format, encode_column(row_ids), seqs, map(string, states)))
        prev_json = encode(prev)
    except Unusual:
        return _hashes_one_by_one(seqs, prev, table, action, actor, now, row_ids, states)
    hashes = []
    for tail in tails:
        digest = hashlib.sha256((head + prev_json + tail).encode("utf-8")).hexdigest()
        hashes.append(digest)
        prev_json = '"' + digest + '"'
    return hashes


def _hashes_one_by_one(seqs: range, prev: str, table: Table, action: str, actor: str,
                       now: datetime, row_ids: list[str], states: list[str]) -> list[str]:
    """_hashes for what its quick way leaves to the reference."""
    hashes = []
    for seq, row_id, state in zip(seqs, row_ids, states):
        prev = entry_hash(seq=seq, table_name=str(table.name), row_id=row_id, action=action,
                          state=state, actor=actor, recorded_at=now, prev_hash=prev)
        hashes.append(prev)
    return hashes


def _row_keys(table: Table, columns: Columns) -> list[str]:
    """row_key of each row."""
    keys = [columns[c.name] for c in table.primary_key.columns]
    if len(keys) == 1:
        return list(map(str, keys[0]))
    return [",".join(map(str, key)) for key in zip(*keys)]


def _last(session: Session) -> tuple[int, str]:
    last = session.execute(
        select(LedgerEntry.seq, LedgerEntry.hash).order_by(LedgerEntry.seq.desc()).limit(1)
    ).first()
    return (last.seq, last.hash) if last else (0, GENESIS_HASH)


def append_rows(session: Session, rows: list[tuple[Table, str, Mapping[str, Any]]]) -> None:
    """Append one entry per (table, action, row) in order, chained to the last entry."""
    _append(session, [(table, action, _columns(table, [row for _, _, row in run]))
                      for (table, action), run in groupby(rows, key=itemgetter(0, 1))])


def insert_columns(session: Session, table: Table, columns: Columns) -> None:
    """Insert rows given column by column (every column, ids included) and append their
    ledger entries: one executemany through the driver, the column types' own conversions
    applied, instead of the unit of work's statement per row. For bulk writes."""
    if len({len(values) for values in columns.values()}) > 1:
        raise ValueError("every column must hold one value per row")
    _insert(session, table, [columns[c.name] for c in table.columns])
    _append(session, [(table, "insert", columns)])


def _append(session: Session, runs: list[tuple[Table, str, Columns]]) -> None:
    """append_rows for runs of rows of one table and action."""
    keyed = [(table, action, columns, row_ids) for table, action, columns in runs
             if (row_ids := _row_keys(table, columns))]
    if not keyed:
        return
    actor = current_actor(session)
    serialise_writers(session)
    seq, prev = _last(session)
    now = utcnow()
    entries: list[list[Any]] = [[] for _ in LedgerEntry.__table__.columns]
    for table, action, columns, row_ids in keyed:
        states = _states(table, columns)
        hashes = _hashes(seq + 1, prev, table, action, actor, now, row_ids, states)
        count = len(hashes)
        for entry_column, values in zip(entries, (
                range(seq + 1, seq + 1 + count), [str(table.name)] * count, row_ids,
                [action] * count, states, [actor] * count, [now] * count,
                [prev, *hashes[:-1]], hashes)):
            entry_column.extend(values)
        seq, prev = seq + count, hashes[-1]
    _insert(session, LedgerEntry.__table__, entries)


#: the driver's placeholder for each DB-API paramstyle that takes positional values
_PLACEHOLDERS = {"qmark": "?", "format": "%s", "pyformat": "%s"}


def _insert(session: Session, table: Table, columns: Sequence[Sequence[Any]]) -> None:
    """Rows given column by column (in the table's order) through the driver's executemany."""
    if not columns or not len(columns[0]):
        return
    connection = session.connection()
    dialect = connection.dialect
    names = [c.name for c in table.columns]
    mark = _PLACEHOLDERS.get(dialect.paramstyle)
    if mark is None:  # a driver without positional placeholders: SQLAlchemy binds by name
        connection.execute(table.insert(), [dict(zip(names, r)) for r in zip(*columns)])
        return
    converted = []
    for column, values in zip(table.columns, columns):
        convert = column.type.dialect_impl(dialect).bind_processor(dialect)
        if convert is not None and values.count(None) < len(values):
            # each shared object (a timestamp, a set of parameters) converted once
            by_id = {key: convert(v) for key, v in dict(zip(map(id, values), values)).items()
                     if v is not None}
            values = list(map(by_id.get, map(id, values)))
        converted.append(values)
    quote = dialect.identifier_preparer.quote
    connection.exec_driver_sql(
        f"INSERT INTO {quote(table.name)} ({', '.join(map(quote, names))}) "
        f"VALUES ({', '.join([mark] * len(names))})", list(zip(*converted)))


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
