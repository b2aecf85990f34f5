"""Serving under load: SQLite writers queued in the
process for the length of their request, the start-up heap kept out of the collector's way,
and a large family's lineage picture drawn around the item."""

from __future__ import annotations

import gc
import re
from collections.abc import Iterator
from pathlib import Path

import pytest
from flask import Flask, request
from flask.testing import FlaskClient
from sqlalchemy import text
from sqlalchemy.orm import Session

from curation import create_app
from curation.db import make_engine, upgrade_to_head
from curation.errors import RuleViolation
from curation.history import TreeNode
from curation.model import Item, Person
from curation.services import accounts
from curation.web import auth
from curation.web import items as items_web
from curation.web.app import database, db_session, settle_for_serving
from curation.web.items import around
from tests.web.test_items import build_family, page

@pytest.fixture
def file_app(tmp_path: Path, monkeypatch: pytest.MonkeyPatch
             ) -> Iterator[tuple[Flask, FlaskClient, list[bool]]]:
    """An app on an SQLite file, logged in, with a route that notes whether the writers'
    lock is held while it runs."""
    url = f"sqlite:///{tmp_path / 'writers.db'}"
    engine = make_engine(url)
    upgrade_to_head(engine)
    with Session(engine) as session:
        person = accounts.add_person(session, actor="test", username="w-admin", name="W")
        person.role = "admin"
        session.commit()
        user_id = person.id
    engine.dispose()
    app = create_app({"DATABASE_URL": url, "TESTING": True, "SECRET_KEY": "t",
                      "WTF_CSRF_ENABLED": False})
    held: list[bool] = []
    writers = database(app).writers
    assert writers is not None

    def probe() -> str:
        db_session().execute(text("SELECT 1"))
        held.append(writers.locked())
        if request.args.get("refuse"):
            raise RuleViolation("refused on purpose")
        return "ok"

    monkeypatch.setitem(auth.ACCESS, "probe", auth.EVERYONE)
    app.add_url_rule("/test/probe", "probe", probe, methods=["GET", "POST"])
    client = app.test_client()
    with client.session_transaction() as cookie:
        cookie["user_id"] = user_id
    yield app, client, held
    assert database(app).engine is not None
    database(app).engine.dispose()


def test_sqlite_writers_hold_the_process_lock_for_their_request_only(
        file_app: tuple[Flask, FlaskClient, list[bool]]) -> None:
    app, client, held = file_app
    writers = database(app).writers
    assert writers is not None
    assert client.get("/test/probe").status_code == 200
    assert client.post("/test/probe").status_code == 200
    assert client.post("/test/probe?refuse=1").status_code == 400
    # Pages read beside the writer; each write held the lock and gave it back, even refused.
    assert held == [False, True, True]
    assert not writers.locked()


def test_settle_for_serving_freezes_the_start_up_heap() -> None:
    try:
        settle_for_serving()
        assert gc.get_freeze_count() > 0
    finally:
        gc.unfreeze()


# ---- the lineage picture of a large family ----------------------------------------------


def _tree(fragments: int, lamellae: int, needles: int) -> list[TreeNode]:
    """P-1 → fragments F<i> → lamellae F<i>-L<j>; the first lamella has `needles` needles."""
    ids = iter(range(1, 100_000))

    def node(code: str, kind: str, parent: TreeNode | None) -> TreeNode:
        return TreeNode(Item(id=next(ids), code=code, kind=kind),
                        parent.item.id if parent else None, parent.depth + 1 if parent else 0)

    particle = node("P-1", "particle", None)
    tree = [particle]
    for i in range(fragments):
        fragment = node(f"F{i}", "fragment", particle)
        cut = [node(f"F{i}-L{j}", "lamella", fragment) for j in range(lamellae)]
        tree += [fragment, *cut]
        if i == 0:
            tree += [node(f"F0-L0-N{k}", "needle", cut[0]) for k in range(needles)]
    return tree


def _codes(nodes: list[TreeNode]) -> set[str]:
    return {n.item.code for n in nodes}


def test_a_small_family_is_drawn_whole() -> None:
    tree = _tree(2, 3, 2)
    assert around(tree, tree[-1].item.id, most=len(tree)) == tree


def test_a_large_family_is_drawn_around_the_needle() -> None:
    tree = _tree(5, 30, 3)  # 159 items
    needle = next(n for n in tree if n.item.code == "F0-L0-N1")
    drawn = around(tree, needle.item.id, most=100)
    # By the rule in its docstring: the line P-1 > F0 > F0-L0 > needle, the needles cut from
    # F0-L0, the lamellae cut from F0, the fragments cut from P-1; nothing else.
    expected = {"P-1", *(f"F{i}" for i in range(5)), *(f"F0-L{j}" for j in range(30)),
                *(f"F0-L0-N{k}" for k in range(3))}
    assert _codes(drawn) == expected


def test_a_large_family_is_drawn_nearest_first_below_the_particle() -> None:
    tree = _tree(5, 30, 3)
    drawn = around(tree, tree[0].item.id, most=100)
    kept = {n.item.id for n in drawn}
    assert len(drawn) == 100
    assert all(n.parent_id is None or n.parent_id in kept for n in drawn)  # one drawing
    # Depth by depth: every fragment and the first lamellae before any needle.
    assert {f"F{i}" for i in range(5)} | {f"F0-L{j}" for j in range(30)} <= _codes(drawn)
    assert not any(code.startswith("F0-L0-N") for code in _codes(drawn))


def test_the_item_page_says_what_its_picture_leaves_out(
        client: FlaskClient, session: Session, operator: Person,
        monkeypatch: pytest.MonkeyPatch) -> None:
    family = build_family(session, operator, "PX", 3)  # particle, 3 lamellae, a needle
    monkeypatch.setattr(items_web, "PICTURE_MAX", 3)
    html = page(client, f"/items/{family.lamellae[1].code}")
    svg = html[html.index("<svg"):html.index("</svg>")]
    drawn = set(re.findall(r'data-item-id="(\d+)"', svg))
    assert drawn == {str(i.id) for i in (family.particle, family.lamellae[1],
                                         family.lamellae[0])}
    assert "3 of the family's 5 items" in html
    assert f'href="/reports/lineage/{family.lamellae[1].code}">lineage report</a>' in html
