"""What every benchmark shares: sizes, databases, timing, results."""

from __future__ import annotations

import os
import tempfile
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from sqlalchemy import Engine, event, select, text
from sqlalchemy.orm import Session

from curation.db import make_engine, make_sessionmaker, upgrade_to_head
from curation.model import Person
from curation.services import accounts, generate

#: the PostgreSQL database the benchmarks may wipe; unset: PostgreSQL is skipped
PG_ENV = "CURATION_BENCH_PG_URL"


@dataclass(frozen=True)
class Size:
    """How big each benchmark's data is."""

    name: str
    particles: int
    large_family: int
    audit_particles: int
    import_events: int
    repeats: int
    load_requests: int


SIZES = {
    "tiny": Size("tiny", 3, 40, 2, 200, 2, 16),
    "default": Size("default", 150, 1000, 8, 20_000, 5, 400),
    "full": Size("full", 10_000, 1000, 1000, 100_000, 3, 4000),
}


@dataclass
class Result:
    """One measured figure against its baseline."""

    name: str
    database: str
    value: float
    baseline: float
    goal: float
    unit: str = "s"
    #: "ratio" compares value/baseline with the goal, "at-most"/"at-least" the value itself
    kind: str = "ratio"
    note: str = ""

    @property
    def ratio(self) -> float:
        return self.value / self.baseline if self.baseline else float("inf")

    @property
    def met(self) -> bool:
        if self.kind == "at-least":
            return self.ratio >= self.goal
        if self.kind == "absolute":
            return self.value <= self.goal
        return self.ratio <= self.goal

    def as_dict(self) -> dict[str, Any]:
        return {"name": self.name, "database": self.database, "value": self.value,
                "baseline": self.baseline, "ratio": round(self.ratio, 3), "goal": self.goal,
                "met": self.met, "unit": self.unit, "note": self.note}


def best_of(repeats: int, fn: Callable[[], Any]) -> float:
    """The fastest of `repeats` runs, seconds."""
    times = []
    for _ in range(repeats):
        started = time.perf_counter()
        fn()
        times.append(time.perf_counter() - started)
    return min(times)


def fresh_engine(backend: str, label: str) -> Engine:
    """An empty migrated database: a temporary SQLite file, or the wiped PostgreSQL one."""
    if backend == "sqlite":
        folder = Path(tempfile.mkdtemp(prefix=f"curation-bench-{label}-"))
        engine = make_engine(f"sqlite:///{folder / 'bench.db'}")
    else:
        engine = make_engine(os.environ[PG_ENV])
        with engine.begin() as conn:
            conn.execute(text("DROP SCHEMA IF EXISTS public CASCADE"))
            conn.execute(text("CREATE SCHEMA public"))
    upgrade_to_head(engine)
    return engine


def populate(engine: Engine, particles: int, large_family: int) -> generate.Generated:
    """Write a synthetic collection and refresh the planner's statistics."""
    with make_sessionmaker(engine)() as session:
        made = generate.generate(session, generate.Plan(
            particles=particles, large_family=large_family, seed=7))
        session.commit()
    with engine.connect() as conn:
        conn.execution_options(isolation_level="AUTOCOMMIT").exec_driver_sql(
            "ANALYZE")
    return made


def account(sessions: Callable[[], Session], role: str) -> int:
    """The id of the benchmarks' login with this role (every page needs one), made once."""
    username = f"bench-{role}"
    with sessions() as session:
        found = session.scalar(select(Person.id).where(Person.username == username))
        if found is None:
            found = accounts.create_account(session, actor="bench", username=username,
                                            name=f"Bench {role.title()}", role=role)[0].id
            session.commit()
    return found


def backends() -> list[str]:
    """SQLite always, PostgreSQL when its URL is set."""
    return ["sqlite", "postgresql"] if os.environ.get(PG_ENV) else ["sqlite"]


@contextmanager
def captured(engine: Engine) -> Iterator[list[tuple[str, Any]]]:
    """Every (SQL, parameters) the engine sends to the driver while inside."""
    seen: list[tuple[str, Any]] = []

    def record(_conn: Any, _cursor: Any, statement: str, parameters: Any, *_: Any) -> None:
        seen.append((statement, parameters))

    event.listen(engine, "before_cursor_execute", record)
    try:
        yield seen
    finally:
        event.remove(engine, "before_cursor_execute", record)
