"""The item list, item page and event page through the Flask test client."""

from __future__ import annotations

import re
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any

import pytest
from flask import Flask
from flask.testing import FlaskClient
from sqlalchemy import event as sa_event
from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import create_app
from curation.model import Event, Item, Person
from curation.services import events, items, stations
from curation.errors import RuleViolation
from curation.web import auth
from curation.web.app import database, db_session
from tests.conftest import hours


@dataclass
class Family:
    """A particle in a capsule, lamellae cut from it, a needle from the first lamella."""

    capsule: Item
    particle: Item
    lamellae: list[Item]
    needle: Item
    capsule_event: Event
    particle_events: list[Event]
    lamella_events: list[Event]
    wrong: Event
    correction: Event


def build_family(session: Session, actor: Person, prefix: str, size: int) -> Family:
    """A family with `size` lamellae and about 2 x `size` events, written through services."""
    def item(code: str, kind: str, at: float, **extra: Any) -> Item:
        return items.register_item(session, actor=actor, code=f"{prefix}-{code}", kind=kind,
                                   created_at=hours(at), **extra)

    def step(target: Item, at: float, technique: str, **extra: Any) -> Event:
        return events.record_event(session, actor=actor, kind="step", item=target,
                                   occurred_at=hours(at), technique=technique, **extra)

    capsule = item("CAP", "capsule", 0)
    particle = item("P", "particle", 0, material="olivine", status="stored")
    items.place(session, actor=actor, item=particle, container=capsule, placed_at=hours(0),
                removed_at=hours(2))
    sealed = events.record_event(session, actor=actor, kind="custody", item=capsule,
                                 occurred_at=hours(1), action="seal-checked")
    particle_events = [step(particle, 3 + n / 100, "sem-imaging") for n in range(size)]
    lamellae, lamella_events = [], []
    for n in range(size):
        cut = step(particle, 10 + n / 100, "fib-liftout", is_destructive=True)
        lamella = item(f"L{n}", "lamella", 10 + n / 100)
        items.derive(session, actor=actor, parent=particle, child=lamella,
                     derived_at=hours(10 + n / 100), step=cut)
        lamellae.append(lamella)
        lamella_events.append(step(lamella, 20 + n / 100, "tem-imaging", summary="bright field"))
    needle = item("N", "needle", 30)
    items.derive(session, actor=actor, parent=lamellae[0], child=needle, derived_at=hours(30))
    wrong = step(lamellae[0], 25, "stem-eels", summary="core-loss map")
    correction = events.correct_event(session, actor=actor, original=wrong,
                                      reason="station clock was an hour fast",
                                      occurred_at=hours(24))
    session.commit()
    return Family(capsule, particle, lamellae, needle, sealed, particle_events, lamella_events,
                  wrong, correction)


@pytest.fixture
def family(session: Session, operator: Person) -> Family:
    return build_family(session, operator, "FA", 3)


def page(client: FlaskClient, url: str, status: int = 200) -> str:
    response = client.get(url)
    assert response.status_code == status, response.get_data(as_text=True)[:2000]
    return response.get_data(as_text=True)


def listed(html: str) -> list[str]:
    """The item codes in the list's rows, in order."""
    return re.findall(r'class="row-link" href="/items/([^"]+)"', html)


def entry(html: str, event_id: int) -> str:
    """The HTML of one timeline entry of an item page."""
    start = html.index(f'<li id="event-{event_id}"')
    ends = [i for i in (html.find('<li id="event-', start + 1), html.find("</ol>", start))
            if i != -1]
    return html[start:min(ends)]


# ---- the list -------------------------------------------------------------------------


def test_root_redirects_to_the_list(client: FlaskClient) -> None:
    response = client.get("/")
    assert response.status_code == 302 and response.headers["Location"].endswith("/items")


def test_list_shows_every_item_with_search_focused(client: FlaskClient, family: Family) -> None:
    html = page(client, "/items")
    codes = listed(html)
    assert {family.particle.code, family.needle.code, family.capsule.code} <= set(codes)
    assert codes == sorted(codes)
    assert re.search(r'<input id="q"[^>]*autofocus', html)


def test_search_is_a_case_insensitive_substring_of_the_code(
        client: FlaskClient, family: Family, make_item: Callable[..., Item]) -> None:
    make_item(code="OTHER-9")
    html = page(client, "/items?q=fa-l")
    assert listed(html) == sorted(lam.code for lam in family.lamellae)
    assert "OTHER-9" not in listed(page(client, "/items?q=fa-"))


def test_search_text_is_not_a_pattern(client: FlaskClient, make_item: Callable[..., Item]) -> None:
    make_item(code="AX_1")
    make_item(code="AXB1")
    assert listed(page(client, "/items?q=X_")) == ["AX_1"]
    assert listed(page(client, "/items?q=%25")) == []


def test_kind_filter(client: FlaskClient, family: Family) -> None:
    assert listed(page(client, "/items?kind=needle")) == [family.needle.code]
    assert listed(page(client, "/items?kind=lamella&q=L1")) == [family.lamellae[1].code]


def test_unknown_kind_is_refused_with_the_reason(client: FlaskClient) -> None:
    html = page(client, "/items?kind=teapot", status=400)
    assert "teapot" in html and "needle" in html


def test_a_long_list_is_paged_with_a_note(client: FlaskClient, session: Session,
                                          make_item: Callable[..., Item]) -> None:
    for n in range(55):
        make_item(code=f"MANY-{n:03d}")
    session.commit()
    first = page(client, "/items?q=MANY")
    assert len(listed(first)) == 50 and "Showing 1–50 of 55" in first
    assert 'rel="next"' in first
    second = page(client, "/items?q=MANY&page=2")
    assert listed(second) == [f"MANY-{n:03d}" for n in range(50, 55)]


def test_odd_list_parameters_still_give_a_page(client: FlaskClient, family: Family) -> None:
    assert family.particle.code in listed(page(client, "/items?page=abc"))
    assert listed(page(client, "/items?page=99999999999999999999999")) == []
    assert listed(page(client, "/items?q=FA-P%00")) == [family.particle.code]


# ---- the item page --------------------------------------------------------------------


def test_item_page_identity_placement_and_family(client: FlaskClient, family: Family,
                                                 session: Session, operator: Person) -> None:
    coupon = items.register_item(session, actor=operator, code="FA-CO", kind="coupon",
                                 created_at=hours(0))
    items.place(session, actor=operator, item=family.needle, container=coupon,
                placed_at=hours(31), position="post 7")
    items.place(session, actor=operator, item=coupon, container=family.capsule,
                placed_at=hours(31))
    session.commit()
    html = page(client, f"/items/{family.needle.code}")
    where = html[html.index("Where it is now"):html.index("Family")]
    assert where.index("FA-CO") < where.index("post 7") < where.index("FA-CAP")
    lamella_html = page(client, f"/items/{family.lamellae[0].code}")
    assert "olivine" in page(client, f"/items/{family.particle.code}")
    assert f"/items/{family.needle.code}" in lamella_html[lamella_html.index("Cut from it"):]


def test_timeline_marks_own_and_inherited_events_apart(client: FlaskClient, family: Family) -> None:
    html = page(client, f"/items/{family.lamellae[0].code}")
    own = entry(html, family.lamella_events[0].id)
    assert "entry-own" in own and "own event" in own and "●" in own
    from_particle = entry(html, family.particle_events[0].id)
    assert "entry-inherited" in from_particle and "◇" in from_particle
    assert re.search(r"from <a[^>]*>particle <span[^>]*>FA-P</span>", from_particle)
    via = entry(html, family.capsule_event.id)
    assert re.search(r"from <a[^>]*>particle.*via <a[^>]*>capsule <span[^>]*>FA-CAP<", via,
                     re.S)
    # Events of a sibling lamella are not part of this lamella's history.
    assert f'id="event-{family.lamella_events[1].id}"' not in html


def test_superseded_event_is_struck_and_names_its_correction(client: FlaskClient,
                                                             family: Family) -> None:
    html = page(client, f"/items/{family.lamellae[0].code}")
    old, new = entry(html, family.wrong.id), entry(html, family.correction.id)
    assert "entry-superseded" in old and "<del>" in old
    assert f"superseded by <a href=\"#event-{family.correction.id}\">#{family.correction.id}" in old
    assert f"correction of <a href=\"#event-{family.wrong.id}\">#{family.wrong.id}" in new
    assert "occurred at" in new and "2026-03-03 08:00:00 UTC" in new
    assert "station clock was an hour fast" in new
    assert "entry-superseded" not in new


def test_lineage_picture_is_inline_svg_with_the_item_marked(client: FlaskClient,
                                                            family: Family) -> None:
    html = page(client, f"/items/{family.lamellae[1].code}")
    svg = html[html.index("<svg"):html.index("</svg>")]
    for member in [family.particle, *family.lamellae, family.needle]:
        assert f'href="/items/{member.code}"' in svg
    current = re.findall(r'<g class="node[^"]*current[^"]*" data-item-id="(\d+)"', svg)
    assert current == [str(family.lamellae[1].id)] and "THIS ITEM" in svg


def test_unknown_code_is_a_404_naming_it(client: FlaskClient) -> None:
    html = page(client, "/items/NO-SUCH-7", status=404)
    assert "NO-SUCH-7" in html


# ---- the event page -------------------------------------------------------------------


def test_event_page_shows_every_field(client: FlaskClient, family: Family, session: Session,
                                      operator: Person) -> None:
    lab = stations.add_location(session, actor=operator, code="FA-ROOM", name="Beam room 2",
                                kind="instrument")
    tem = stations.add_instrument(session, actor=operator, code="FA-TEM", name="Test TEM",
                                  location=lab, techniques="tem stem eels")
    station = stations.add_station(session, actor=operator, code="FA-PC", name="TEM PC",
                                   instrument=tem, location=lab)
    shot = events.record_event(
        session, actor=operator, kind="step", item=family.needle, occurred_at=hours(40),
        ended_at=hours(41), station=station, technique="tem-imaging", summary="overview",
        details={"voltage_kV": 200, "mode": "<bright field>"}, note="tilt limited")
    session.commit()
    html = page(client, f"/events/{shot.id}")
    for text in ("tem-imaging", "FA-PC", "FA-TEM", "Beam room 2", operator.name, "overview",
                 "tilt limited", "voltage_kV", "200", "&lt;bright field&gt;",
                 f"/items/{family.needle.code}", "2026-03-04 00:00:00 UTC",
                 "2026-03-04 01:00:00 UTC"):
        assert text in html, text


def test_event_page_links_a_correction_both_ways(client: FlaskClient, family: Family) -> None:
    old = page(client, f"/events/{family.wrong.id}")
    assert "Superseded by" in old and f"/events/{family.correction.id}" in old
    new = page(client, f"/events/{family.correction.id}")
    assert "Correction of" in new and f"/events/{family.wrong.id}" in new


def test_event_page_lists_what_a_step_made(client: FlaskClient, family: Family,
                                           session: Session) -> None:
    lift = session.get(Event, family.lamellae[2].parents[0].step_id)
    assert lift is not None
    html = page(client, f"/events/{lift.id}")
    assert f"/items/{family.lamellae[2].code}" in html[html.index("Items this step made"):]


def test_unknown_event_is_a_404(client: FlaskClient) -> None:
    assert "99999999" in page(client, "/events/99999999", status=404)


# ---- headers, settings ----------------------------------------------------------------


def test_security_headers_on_pages_and_errors(client: FlaskClient, family: Family) -> None:
    for url in ("/items", f"/items/{family.particle.code}", "/items/NOPE", "/no/such/page"):
        response = client.get(url)
        csp = response.headers["Content-Security-Policy"]
        assert "default-src 'self'" in csp and "frame-ancestors 'none'" in csp
        assert response.headers["X-Content-Type-Options"] == "nosniff"
        assert response.headers["Referrer-Policy"] == "same-origin"
        html = response.get_data(as_text=True)
        # The policy forbids inline code and styles: the pages must not need any.
        assert not re.search(r"<script(?![^>]*\bsrc=)", html)
        assert not re.search(r"\sstyle=", html) and "<style" not in html


def test_static_files_ship_with_the_package(client: FlaskClient) -> None:
    for name in ("curation.css", "curation.js"):
        with client.get(f"/static/{name}") as response:
            assert response.status_code == 200


def test_settings_come_from_code_then_environment_then_mapping(
        monkeypatch: pytest.MonkeyPatch, tmp_path: Any) -> None:
    monkeypatch.setenv("CURATION_DATABASE_URL", f"sqlite:///{tmp_path / 'env.db'}")
    monkeypatch.delenv("CURATION_SECRET_KEY", raising=False)
    from_env = create_app()
    from_mapping = create_app({"DATABASE_URL": f"sqlite:///{tmp_path / 'given.db'}"})
    try:
        assert str(database(from_env).engine.url).endswith("env.db")
        assert str(database(from_mapping).engine.url).endswith("given.db")
        assert len(from_env.config["SECRET_KEY"]) >= 32
        assert from_env.config["SECRET_KEY"] != from_mapping.config["SECRET_KEY"]
    finally:
        for app in (from_env, from_mapping):
            database(app).engine.dispose()


def test_a_request_commits_on_success_and_rolls_back_on_a_domain_error(
        app: Flask, client: FlaskClient, session: Session, monkeypatch: pytest.MonkeyPatch) -> None:
    # Routes added here need an access rule like every other route.
    monkeypatch.setitem(auth.ACCESS, "keep", auth.EVERYONE)
    monkeypatch.setitem(auth.ACCESS, "refuse", auth.EVERYONE)

    def write(code: str, refuse: bool) -> str:
        items.register_item(db_session(), actor="web-test", code=code, kind="particle",
                            created_at=hours(0))
        if refuse:
            raise RuleViolation("refused on purpose")
        return "written"

    app.add_url_rule("/test/keep", "keep", lambda: write("KEPT-1", False))
    app.add_url_rule("/test/refuse", "refuse", lambda: write("DROPPED-1", True))
    assert client.get("/test/keep").status_code == 200
    assert "refused on purpose" in page(client, "/test/refuse", status=400)
    found = session.scalars(select(Item.code).where(Item.code.in_(["KEPT-1", "DROPPED-1"])))
    assert set(found) == {"KEPT-1"}


def test_an_engine_can_be_passed_in(engine: Any) -> None:
    app = create_app({"DB_BIND": engine, "TESTING": True, "SECRET_KEY": "t"})
    assert database(app).engine is None
    client = app.test_client()
    with client.session_transaction() as cookie:
        cookie["user_id"] = 1  # no account with a role: looked up through the engine
    assert client.get("/items").status_code == 302
    assert client.get("/login").status_code == 200


# ---- cost does not grow with the data -------------------------------------------------


@contextmanager
def counting(connection: Any) -> Iterator[list[str]]:
    """Collect every SQL statement sent on the connection."""
    statements: list[str] = []

    def count(_conn: Any, _cursor: Any, statement: str, *_args: Any) -> None:
        statements.append(statement)

    sa_event.listen(connection, "before_cursor_execute", count)
    try:
        yield statements
    finally:
        sa_event.remove(connection, "before_cursor_execute", count)


def _cost(client: FlaskClient, connection: Any, url: str) -> tuple[int, str]:
    with counting(connection) as statements:
        html = page(client, url)
    return len(statements), html


def test_page_cost_does_not_grow_with_the_family(client: FlaskClient, connection: Any,
                                                 session: Session, operator: Person) -> None:
    small = build_family(session, operator, "SM", 3)
    large = build_family(session, operator, "LG", 40)
    for pick in (lambda f: f.particle, lambda f: f.lamellae[0], lambda f: f.needle):
        small_cost, _ = _cost(client, connection, f"/items/{pick(small).code}")
        large_cost, html = _cost(client, connection, f"/items/{pick(large).code}")
        assert large_cost == small_cost, (pick(large).code, small_cost, large_cost)
    assert html.count('class="node ') == 42  # the large page really drew the whole family
    small_list, _ = _cost(client, connection, "/items?q=SM-")
    large_list, html = _cost(client, connection, "/items?q=LG-")
    assert len(listed(html)) == 43 and large_list == small_list
    assert _cost(client, connection, f"/events/{large.correction.id}")[0] == \
        _cost(client, connection, f"/events/{small.correction.id}")[0]
