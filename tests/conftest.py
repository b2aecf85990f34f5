"""Fixtures: one engine per backend (SQLite always, PostgreSQL when configured), a
savepoint-joined session per test, and factories that write through the services."""

from __future__ import annotations

import itertools
import os
from collections.abc import Callable, Iterator
from datetime import datetime, timedelta, timezone
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import Engine, create_engine, text
from sqlalchemy.engine import make_url
from sqlalchemy.orm import Session

from curation.db import make_engine, upgrade_to_head
from curation.model import Event, Item, Person
from curation.services import accounts, events, items

PG_ENV = "CURATION_TEST_DATABASE_URL"
IN_CI = os.environ.get("CI", "").lower() == "true"

#: a fixed origin for hand-built timelines
T0 = datetime(2026, 3, 2, 8, 0, tzinfo=timezone.utc)


def hours(n: float) -> datetime:
    """T0 plus n hours."""
    return T0 + timedelta(hours=n)


def require_postgres() -> str:
    """The PostgreSQL test URL; skip without one, but fail in CI."""
    url = os.environ.get(PG_ENV)
    if not url:
        if IN_CI:
            pytest.fail(f"CI=true but {PG_ENV} is not set: PostgreSQL tests must run in CI")
        pytest.skip(f"{PG_ENV} not set")
    return url


BACKENDS = ["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)]


def empty_database_url(backend: str, tmp_path: Path, name: str) -> str:
    """The URL of a new, empty database of its own: an SQLite file, or a PostgreSQL database
    named after the test database with `_name` added (dropped first if it is left over)."""
    if backend == "sqlite":
        return f"sqlite:///{tmp_path / (name + '.db')}"
    base = make_url(require_postgres())
    database = f"{base.database}_{name}"
    admin = create_engine(base.set(database="postgres"), isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{database}" WITH (FORCE)'))
        conn.execute(text(f'CREATE DATABASE "{database}"'))
    admin.dispose()
    return base.set(database=database).render_as_string(hide_password=False)


def reset_postgres(url: str) -> Engine:
    """An engine on an emptied scratch PostgreSQL database."""
    engine = make_engine(url)
    with engine.begin() as conn:
        conn.execute(text("DROP SCHEMA IF EXISTS public CASCADE"))
        conn.execute(text("CREATE SCHEMA public"))
    return engine


@pytest.fixture(scope="session", autouse=True)
def private_home(tmp_path_factory: pytest.TempPathFactory) -> Iterator[None]:
    """Keep every test away from the user's real data folder and database."""
    saved = {k: os.environ.get(k) for k in ("CURATION_HOME", "CURATION_DATABASE_URL")}
    os.environ["CURATION_HOME"] = str(tmp_path_factory.mktemp("home"))
    os.environ.pop("CURATION_DATABASE_URL", None)
    yield
    for key, value in saved.items():
        if value is None:
            os.environ.pop(key, None)
        else:
            os.environ[key] = value


@pytest.fixture(scope="session", params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def engine(request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory) -> Iterator[Engine]:
    """A migrated database on each backend, shared by the whole run."""
    if request.param == "sqlite":
        path = tmp_path_factory.mktemp("db") / "test.db"
        eng = make_engine(f"sqlite:///{path}")
    else:
        eng = reset_postgres(require_postgres())
    upgrade_to_head(eng)
    yield eng
    eng.dispose()


@pytest.fixture
def connection(engine: Engine) -> Iterator[Any]:
    """A connection inside a transaction that is rolled back after the test."""
    with engine.connect() as conn:
        trans = conn.begin()
        yield conn
        trans.rollback()


@pytest.fixture
def session(connection: Any) -> Iterator[Session]:
    """A session whose commits only release savepoints of the test's transaction."""
    sess = Session(bind=connection, join_transaction_mode="create_savepoint",
                   expire_on_commit=False)
    yield sess
    sess.close()


_counter = itertools.count(1)


@pytest.fixture
def operator(session: Session) -> Person:
    """A person to act as the operator of test writes."""
    return accounts.add_person(session, actor="test", username=f"op{next(_counter)}",
                               name="Test Operator")


@pytest.fixture
def make_item(session: Session, operator: Person) -> Callable[..., Item]:
    """Factory: register an item with defaults; override any field."""

    def make(**overrides: Any) -> Item:
        fields: dict[str, Any] = {"code": f"T-{next(_counter)}", "kind": "particle",
                                  "created_at": T0}
        fields.update(overrides)
        return items.register_item(session, actor=operator, **fields)

    return make


@pytest.fixture
def make_event(session: Session, operator: Person) -> Callable[..., Event]:
    """Factory: record an event on an item at T0 + hours."""

    def make(item: Item, at: float = 0.0, kind: str = "step", **overrides: Any) -> Event:
        fields: dict[str, Any] = {"kind": kind, "item": item, "occurred_at": hours(at)}
        if kind == "step":
            fields["technique"] = "sem-imaging"
        fields.update(overrides)
        return events.record_event(session, actor=operator, **fields)

    return make


@pytest.fixture(scope="session")
def demo_url(tmp_path_factory: pytest.TempPathFactory) -> str:
    """A demo database built once by `curation demo --no-serve`, for tests that only read it."""
    from click.testing import CliRunner

    from curation.cli import main

    url = f"sqlite:///{tmp_path_factory.mktemp('demo') / 'demo.db'}"
    result = CliRunner().invoke(main, ["demo", "--no-serve", "--db", url])
    assert result.exit_code == 0, result.output
    return url
