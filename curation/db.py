"""Declarative base, the UTC timestamp type, engines with the right pragmas, sessions."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

from sqlalchemy import JSON, DateTime, Engine, MetaData, create_engine, event
from sqlalchemy.engine import Dialect, make_url
from sqlalchemy.orm import DeclarativeBase, Session, sessionmaker
from sqlalchemy.types import TypeDecorator

from curation.errors import NaiveTimestamp

NAMING_CONVENTION = {
    "ix": "ix_%(column_0_label)s",
    "uq": "uq_%(table_name)s_%(column_0_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}

#: SQLite waits this long for a lock before giving up (milliseconds).
SQLITE_BUSY_TIMEOUT_MS = 10_000


class UTCDateTime(TypeDecorator[datetime]):
    """A timezone-aware timestamp stored as UTC; refuses naive datetimes."""

    impl = DateTime(timezone=True)
    cache_ok = True

    def process_bind_param(self, value: datetime | None, dialect: Dialect) -> datetime | None:
        if value is None:
            return None
        if not isinstance(value, datetime):
            raise TypeError(f"expected a datetime, got {value!r}")
        if value.tzinfo is None or value.utcoffset() is None:
            raise NaiveTimestamp("timestamp", value.isoformat())
        value = value.astimezone(timezone.utc)
        return value.replace(tzinfo=None) if dialect.name == "sqlite" else value

    def process_result_value(self, value: datetime | None, dialect: Dialect) -> datetime | None:
        if value is None:
            return None
        if value.tzinfo is None:
            return value.replace(tzinfo=timezone.utc)
        return value.astimezone(timezone.utc)


def utcnow() -> datetime:
    """The server clock, timezone-aware UTC."""
    return datetime.now(timezone.utc)


class Base(DeclarativeBase):
    """Base of every table; deterministic constraint names for Alembic."""

    metadata = MetaData(naming_convention=NAMING_CONVENTION)
    type_annotation_map = {datetime: UTCDateTime(), dict[str, Any]: JSON()}


def _sqlite_pragmas(dbapi_connection: Any, _record: Any) -> None:
    """Foreign keys on, WAL, full fsync, a busy timeout: on every new SQLite connection."""
    # Let SQLAlchemy, not the driver, decide when a transaction begins.
    dbapi_connection.isolation_level = None
    cursor = dbapi_connection.cursor()
    cursor.execute("PRAGMA foreign_keys=ON")
    cursor.execute("PRAGMA journal_mode=WAL")
    cursor.execute("PRAGMA synchronous=FULL")
    cursor.execute(f"PRAGMA busy_timeout={SQLITE_BUSY_TIMEOUT_MS}")
    cursor.close()


#: execution option marking a connection that only reads (SQLite then begins DEFERRED)
READ_ONLY = "curation_read_only"


def _sqlite_begin(conn: Any) -> None:
    # A writing transaction takes the write lock at BEGIN, so two writers never both read
    # and then fail to upgrade ("database is locked"); the second waits its turn (busy
    # timeout). Pages that only read say so and keep WAL's concurrent readers.
    read_only = conn.get_execution_options().get(READ_ONLY, False)
    conn.exec_driver_sql("BEGIN" if read_only else "BEGIN IMMEDIATE")


def make_engine(url: str, **kwargs: Any) -> Engine:
    """An engine for `url`; SQLite files get their folder created and the pragmas applied."""
    parsed = make_url(url)
    if parsed.get_backend_name() == "sqlite":
        if parsed.database and parsed.database != ":memory:":
            Path(parsed.database).parent.mkdir(parents=True, exist_ok=True)
        engine = create_engine(url, **kwargs)
        event.listen(engine, "connect", _sqlite_pragmas)
        event.listen(engine, "begin", _sqlite_begin)
        return engine
    return create_engine(url, pool_pre_ping=True, **kwargs)


def make_sessionmaker(bind: Any, **kwargs: Any) -> sessionmaker[Session]:
    """Sessions that keep loaded objects usable after commit."""
    return sessionmaker(bind=bind, expire_on_commit=False, **kwargs)


MIGRATIONS = Path(__file__).parent / "migrations"


def alembic_config(connection: Any = None) -> Any:
    """An Alembic Config for the bundled migrations, bound to an open connection if given."""
    from alembic.config import Config

    cfg = Config()
    cfg.set_main_option("script_location", str(MIGRATIONS))
    cfg.attributes["configure_logger"] = False
    if connection is not None:
        cfg.attributes["connection"] = connection
    return cfg


@contextmanager
def _migrating(engine: Engine) -> Iterator[Any]:
    """A connection in one transaction for migrations.

    SQLite rebuilds a table to alter it (batch mode), which a referencing row would block
    while foreign keys are enforced; enforcement is paused outside the transaction, as
    SQLite requires, and every reference is checked again before the commit.
    """
    with engine.connect() as connection:
        sqlite = engine.dialect.name == "sqlite"
        if sqlite:
            connection.connection.driver_connection.execute("PRAGMA foreign_keys=OFF")
        try:
            with connection.begin():
                yield connection
                if sqlite:
                    broken = connection.exec_driver_sql("PRAGMA foreign_key_check").fetchall()
                    if broken:
                        raise RuntimeError(f"migration left broken references: {broken[:5]}")
        finally:
            if sqlite:
                connection.connection.driver_connection.execute("PRAGMA foreign_keys=ON")


def upgrade_to_head(engine: Engine, revision: str = "head") -> None:
    """Migrate the database behind `engine` to `revision` (default: the newest)."""
    from alembic import command

    with _migrating(engine) as connection:
        command.upgrade(alembic_config(connection), revision)


def downgrade_to(engine: Engine, revision: str) -> None:
    """Migrate the database behind `engine` down to `revision` ("base" for empty)."""
    from alembic import command

    with _migrating(engine) as connection:
        command.downgrade(alembic_config(connection), revision)


def current_revision(engine: Engine) -> str | None:
    """The revision the database is at, or None when it was never migrated."""
    from alembic.runtime.migration import MigrationContext

    with engine.connect() as connection:
        return MigrationContext.configure(connection).get_current_revision()


def libpq_url(url: str) -> str:
    """The URL as PostgreSQL's own tools read it (no SQLAlchemy driver suffix)."""
    parsed = make_url(url)
    return parsed.set(drivername="postgresql").render_as_string(hide_password=False)


def backup(url: str, target: Path) -> None:
    """A consistent copy of the database in `target` (SQLite file, or pg_dump's custom format)."""
    import sqlite3
    import subprocess

    parsed = make_url(url)
    if parsed.get_backend_name() == "sqlite":
        source = sqlite3.connect(parsed.database or "")
        copy = sqlite3.connect(target)
        try:
            source.backup(copy)  # the online backup API: consistent even while others write
        finally:
            copy.close()
            source.close()
        return
    subprocess.run(["pg_dump", "--format=custom", "--no-owner", f"--file={target}",
                    libpq_url(url)], check=True, capture_output=True)


def restore(source: Path, url: str) -> None:
    """Replace the database at `url` with the copy in `source`."""
    import shutil
    import subprocess

    parsed = make_url(url)
    if parsed.get_backend_name() == "sqlite":
        path = Path(parsed.database or "")
        for suffix in ("-wal", "-shm"):
            Path(f"{path}{suffix}").unlink(missing_ok=True)
        shutil.copyfile(source, path)
        return
    subprocess.run(["pg_restore", "--clean", "--if-exists", "--no-owner", "--single-transaction",
                    f"--dbname={libpq_url(url)}", str(source)], check=True, capture_output=True)
