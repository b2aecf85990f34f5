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


def _raw(engine: Engine, statements: list[tuple[str, Any]]) -> Callable[[], Any]:
    """Send the captured statements through one open driver connection, fetching every row."""
    conn = engine.raw_connection()

    def run() -> Any:
        rows = []
        for sql, params in statements:
            cursor = conn.cursor()
            cursor.execute(sql, params)
            rows.append(cursor.fetchall())
            cursor.close()
        return rows
    run.close = conn.close  # type: ignore[attr-defined]
    return run


def _pair(engine: Engine, size: Size, name: str, call: Callable[[Any], Any],
          every: bool = False) -> Result:
    """Time `call(session)` on one open session against the statements it sends, raw, on one
    open driver connection: its recursive statement, or `every` statement it sends."""
    with make_sessionmaker(engine)() as session:
        session.connection()
        with captured(engine) as seen:
            call(session)
        statements = seen if every else [next((q, p) for q, p in seen
                                               if "RECURSIVE" in q.upper())]

        value = best_of(size.repeats * 20, lambda: call(session))
    raw = _raw(engine, statements)
    try:
        baseline = best_of(size.repeats * 20, raw)
    finally:
        raw.close()  # type: ignore[attr-defined]
    return Result(name, engine.dialect.name, value, baseline, GOAL,
                  note=f"{len(statements)} statement(s)")


def run(engine: Engine, size: Size, codes: dict[str, str]) -> list[Result]:
    """Descendants of the large family, the depth-6 needle's history: the resolver, and the
    resolver with the events it names loaded as objects."""
    with make_sessionmaker(engine)() as session:
        family = session.scalar(select(Item.id).where(Item.code == codes["large_family"]))
        needle = session.scalar(select(Item.id).where(Item.code == codes["deep_needle"]))
    return [
        _pair(engine, size, f"history: descendants of a particle ({size.large_family})",
              lambda s: history.descendants(s, [family])),
        _pair(engine, size, "history: resolver, effective history of a depth-6 needle",
              lambda s: history.resolve(s, [needle])),
        _pair(engine, size, "history: the needle's history with its events loaded",
              lambda s: history.effective_history(s, needle), every=True),
    ]
