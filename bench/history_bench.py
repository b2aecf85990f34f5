"""The history resolver against the same recursive SQL sent through the raw driver cursor."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from common import Result, Size, best_of, captured
from sqlalchemy import Engine, select

from curation import history
from curation.db import make_sessionmaker
from curation.model import Item

GOAL = 1.5


def _raw(engine: Engine, sql: str, params: Any) -> Callable[[], Any]:
    """Send one captured statement through a driver cursor and fetch every row."""
    def run() -> Any:
        conn = engine.raw_connection()
        try:
            cursor = conn.cursor()
            cursor.execute(sql, params)
            rows = cursor.fetchall()
            cursor.close()
            return rows
        finally:
            conn.close()
    return run


def _pair(engine: Engine, size: Size, name: str, call: Callable[[Any], Any]) -> Result:
    """Time `call(session)` in a fresh session against its own first statement, raw."""
    maker = make_sessionmaker(engine)

    def app() -> None:
        with maker() as session:
            call(session)

    with captured(engine) as seen:
        app()
    sql, params = next((q, p) for q, p in seen if "RECURSIVE" in q.upper())
    value = best_of(size.repeats, app)
    baseline = best_of(size.repeats, _raw(engine, sql, params))
    return Result(name, engine.dialect.name, value, baseline, GOAL)


def run(engine: Engine, size: Size, codes: dict[str, str]) -> list[Result]:
    """Descendants of the large family, and the effective history of the deepest needle."""
    with make_sessionmaker(engine)() as session:
        family = session.scalar(select(Item.id).where(Item.code == codes["large_family"]))
        needle = session.scalar(select(Item.id).where(Item.code == codes["deep_needle"]))
    return [
        _pair(engine, size, f"history: descendants of a particle ({size.large_family})",
              lambda s: history.descendants(s, [family])),
        _pair(engine, size, "history: effective history of a depth-6 needle",
              lambda s: history.effective_history(s, needle)),
    ]
