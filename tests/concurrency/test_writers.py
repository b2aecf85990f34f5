"""Several writers at once, and writers killed at random: nothing acknowledged is lost, no
update is lost, the ledger stays one chain, and the databases keep their durability settings."""

from __future__ import annotations

import random
import signal
import subprocess
import sys
import time
from collections.abc import Iterator
from pathlib import Path

import pytest
from sqlalchemy import Engine, select, text
from sqlalchemy.orm import Session

from curation import ledger
from curation.db import make_engine, upgrade_to_head
from curation.model import Event
from curation.services import accounts, items
from tests.concurrency.writer import COUPON, OPERATOR
from tests.conftest import BACKENDS, T0, empty_database_url

WRITER = Path(__file__).with_name("writer.py")
WRITERS, MARKS_EACH, KILL_ROUNDS = 8, 6, 20


@pytest.fixture(params=BACKENDS)
def database(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[str]:
    """An empty migrated database of its own, holding one coupon and one writer."""
    url = empty_database_url(request.param, tmp_path, "writers")
    engine = make_engine(url)
    upgrade_to_head(engine)
    with Session(engine) as session:
        who = accounts.add_person(session, actor="setup", username=OPERATOR, name="Writer")
        items.register_item(session, actor=who, code=COUPON, kind="coupon", created_at=T0)
        session.commit()
    engine.dispose()
    yield url


def _start(url: str, mode: str, count: int, ack: Path) -> subprocess.Popen[bytes]:
    # A killed writer's output is of no interest; a counting writer's errors are.
    err = subprocess.PIPE if mode == "count" else subprocess.DEVNULL
    return subprocess.Popen([sys.executable, str(WRITER), url, mode, str(count), str(ack)],
                            stdout=subprocess.DEVNULL, stderr=err)


def _marks(engine: Engine) -> list[Event]:
    with Session(engine) as session:
        return list(session.scalars(select(Event).where(Event.action == "mark")))


def test_eight_writers_lose_nothing(database: str, tmp_path: Path) -> None:
    acks = [tmp_path / f"ack-{n}" for n in range(WRITERS)]
    procs = [_start(database, "count", MARKS_EACH, ack) for ack in acks]
    errors = [p.communicate(timeout=120)[1].decode() for p in procs]
    assert all(p.returncode == 0 for p in procs), errors
    assert not any("locked" in e for e in errors), errors
    engine = make_engine(database)
    marks = _marks(engine)
    acknowledged = {line.split()[1] for ack in acks for line in ack.read_text().splitlines()}
    assert {m.details["token"] for m in marks} == acknowledged
    # Every read-modify-write saw the one before it: the numbers run 1..N with no repeat.
    assert sorted(m.details["n"] for m in marks) == list(range(1, WRITERS * MARKS_EACH + 1))
    with Session(engine) as session:
        assert ledger.verify(session).ok
    engine.dispose()


def test_killed_writers_keep_every_acknowledged_write(database: str, tmp_path: Path) -> None:
    rng = random.Random(20261202)
    ack = tmp_path / "acks"
    ack.touch()
    for _ in range(KILL_ROUNDS):
        procs = [_start(database, "forever", 0, ack) for _ in range(2)]
        before = len(ack.read_text().splitlines())
        deadline = time.monotonic() + 30
        while len(ack.read_text().splitlines()) == before and time.monotonic() < deadline:
            time.sleep(0.02)  # wait until the writers are really writing
        time.sleep(rng.uniform(0.0, 0.25))
        for p in procs:
            p.send_signal(signal.SIGKILL)
            p.wait(timeout=30)
    acknowledged = {line.split()[1] for line in ack.read_text().splitlines()}
    assert len(acknowledged) >= KILL_ROUNDS
    engine = make_engine(database)
    assert acknowledged <= {m.details["token"] for m in _marks(engine)}
    with Session(engine) as session:
        if engine.dialect.name == "sqlite":
            assert session.execute(text("PRAGMA integrity_check")).scalar() == "ok"
        assert ledger.verify(session).ok
    engine.dispose()


def test_durability_settings_on_every_connection(engine: Engine) -> None:
    for _ in range(3):
        with engine.connect() as conn:
            if engine.dialect.name == "sqlite":
                assert conn.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"
                assert conn.exec_driver_sql("PRAGMA synchronous").scalar() == 2  # FULL
                assert conn.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1
                assert conn.exec_driver_sql("PRAGMA busy_timeout").scalar() >= 5000
            else:
                assert conn.exec_driver_sql("SHOW fsync").scalar() == "on"
                assert conn.exec_driver_sql("SHOW synchronous_commit").scalar() == "on"
