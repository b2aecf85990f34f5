"""Statements the item page and the lineage report issue, for a small and a large family."""

from __future__ import annotations

from common import Result, account, captured
from sqlalchemy import Engine, select

from curation import create_app
from curation.db import make_sessionmaker
from curation.history import descendants
from curation.model import Item
from curation.reports import lineage
from curation.web.app import database


def _family_with(engine: Engine, wanted: int) -> str:
    """The particle whose descendant count is nearest `wanted`."""
    with make_sessionmaker(engine)() as session:
        particles = session.execute(select(Item.id, Item.code).where(Item.kind == "particle")
                                    .order_by(Item.id).limit(60)).all()
        counts = [(abs(len(descendants(session, [i])) - wanted), code) for i, code in particles]
    return min(counts)[1]


def _page_statements(url: str, code: str) -> int:
    app = create_app({"DATABASE_URL": url, "SECRET_KEY": "bench"})
    engine = database(app).engine
    assert engine is not None
    client = app.test_client()
    with client.session_transaction() as cookie:
        cookie["user_id"] = account(make_sessionmaker(engine), "admin")
    client.get(f"/items/{code}")
    with captured(engine) as seen:
        assert client.get(f"/items/{code}").status_code == 200
    engine.dispose()
    return len(seen)


def _report_statements(engine: Engine, code: str) -> int:
    with make_sessionmaker(engine)() as session, captured(engine) as seen:
        lineage.build(session, code)
    return len(seen)


def run(engine: Engine, url: str, large: str) -> list[Result]:
    """Statement counts with ~10 and ~1,000 descendants: the goal is equal counts."""
    small = _family_with(engine, 10)
    name = engine.dialect.name
    return [
        Result("item page: statements, 1,000 vs 10 descendants", name,
               _page_statements(url, large), _page_statements(url, small), 1.0, unit="statements"),
        Result("lineage report: statements, 1,000 vs 10 descendants", name,
               _report_statements(engine, large), _report_statements(engine, small), 1.0,
               unit="statements"),
    ]
