"""Logins, the role x route matrix, form tokens, escaping, rate limits and cookie flags."""

from __future__ import annotations

from typing import Any

import pytest
from flask import Flask
from sqlalchemy.orm import Session

from curation import create_app
from curation.model import Person
from curation.services import accounts
from curation.web import auth
from tests.web.conftest import account, logged_in


def _url(app: Flask, rule: Any) -> str:
    """The rule's path with a placeholder in each argument (nothing has these codes)."""
    path = rule.rule
    for name in rule.arguments:
        converter = rule._converters[name].__class__.__name__
        path = path.replace(f"<{'int:' if 'Integer' in converter else 'path:' if 'Path' in converter else ''}{name}>",
                            "9999" if "Integer" in converter else "nothing")
    return path


def _routes(app: Flask) -> list[tuple[str, str, str]]:
    found = []
    for rule in app.url_map.iter_rules():
        for method in sorted(rule.methods - {"HEAD", "OPTIONS"}):
            found.append((rule.endpoint, method, _url(app, rule)))
    return sorted(found)


def test_every_route_has_an_access_rule(app: Flask) -> None:
    missing = [e for e, _, _ in _routes(app)
               if e not in auth.ACCESS and e not in auth.PUBLIC and e not in auth.TOKEN]
    assert missing == [], f"add these endpoints to curation.web.auth.ACCESS: {missing}"


@pytest.mark.parametrize("role", accounts.ROLES)
def test_role_by_route_matrix(app: Flask, session: Session, role: str) -> None:
    client = logged_in(app, account(session, f"m-{role}", role))
    for endpoint, method, url in _routes(app):
        if endpoint not in auth.ACCESS or endpoint == "auth.logout":
            continue
        answer = client.open(url, method=method)
        allowed = role in auth.ACCESS[endpoint]
        assert (answer.status_code == 403) == (not allowed), (role, endpoint, answer.status_code)
        assert "/login" not in (answer.location or ""), (role, endpoint)


def test_visitors_are_sent_to_the_login_page(app: Flask) -> None:
    client = app.test_client()
    for endpoint, method, url in _routes(app):
        if endpoint in auth.ACCESS:
            answer = client.open(url, method=method)
            assert answer.status_code == 302, endpoint
            assert answer.location.startswith("/login?next=")
    assert client.get("/login").status_code == 200
    assert client.get("/api/v1/openapi.json").status_code == 200
    assert client.get("/api/v1/items/x").status_code == 401  # its own bearer tokens


@pytest.fixture
def guarded(connection: Any) -> Flask:
    """The app with form tokens on, as in production."""
    return create_app({"DB_BIND": connection, "TESTING": True, "SECRET_KEY": "t"})


def test_every_form_post_without_its_token_is_refused(guarded: Flask, admin: Person) -> None:
    client = logged_in(guarded, admin)
    posts = [(e, url) for e, method, url in _routes(guarded)
             if method == "POST" and e not in auth.TOKEN]
    assert len(posts) >= 8
    for endpoint, url in posts:
        answer = client.post(url, data={"operator": admin.username})
        assert answer.status_code == 400 and "CSRF" in answer.text, endpoint


def _password_login(client: Any, username: str, password: str, next_: str = "") -> Any:
    page = client.get("/login")
    token = page.text.split('name="csrf_token" type="hidden" value="')[1].split('"')[0]
    return client.post(f"/login{next_}", data={"csrf_token": token, "username": username,
                                               "password": password})


def test_login_renews_the_session_and_logout_clears_it(guarded: Flask, session: Session) -> None:
    accounts.create_account(session, actor="test", username="lg", name="L G", role="auditor",
                            password="a long enough password")
    client = guarded.test_client()
    with client.session_transaction() as cookie:
        cookie["planted"] = "by someone else"
    answer = _password_login(client, "lg", "a long enough password", "?next=//evil.example/x")
    assert answer.status_code == 302 and answer.location == "/"
    cookie_header = answer.headers["Set-Cookie"]
    assert "HttpOnly" in cookie_header and "SameSite=Lax" in cookie_header
    with client.session_transaction() as cookie:
        assert "planted" not in cookie and cookie["user_id"]
    assert client.get("/findings").status_code == 200
    token = client.get("/findings").text.split('name="csrf_token" value="')[1].split('"')[0]
    assert client.post("/logout", data={"csrf_token": token}).status_code == 302
    assert client.get("/findings").status_code == 302


def test_a_wrong_password_and_an_unknown_name_get_the_same_refusal(
        guarded: Flask, session: Session) -> None:
    accounts.create_account(session, actor="test", username="wp", name="W P", role="curator",
                            password="the right password")
    client = guarded.test_client()
    wrong = _password_login(client, "wp", "not the password")
    unknown = _password_login(client, "nobody-here", "the right password")
    assert wrong.status_code == unknown.status_code == 200
    assert accounts.REFUSED in wrong.text and accounts.REFUSED in unknown.text


def test_login_attempts_are_rate_limited(guarded: Flask, session: Session) -> None:
    accounts.create_account(session, actor="test", username="rl", name="R L", role="curator",
                            password="the right password")
    client = guarded.test_client()
    for _ in range(auth.PER_ACCOUNT):
        assert "wrong password" in _password_login(client, "rl", "guess").text
    # Even the right password waits now: the counter does not tell guesses apart.
    limited = _password_login(client, "rl", "the right password")
    assert limited.status_code == 429 and "Too many failed attempts" in limited.text


def test_secure_cookie_when_configured(connection: Any, admin: Person) -> None:
    app = create_app({"DB_BIND": connection, "TESTING": True, "SECRET_KEY": "t",
                      "SESSION_COOKIE_SECURE": True})
    client = logged_in(app, admin)
    answer = client.get("/items")
    assert answer.status_code == 200
    with app.test_request_context():
        assert app.config["SESSION_COOKIE_SECURE"] and app.config["SESSION_COOKIE_HTTPONLY"]


@pytest.mark.parametrize("key", [None, "short", "a" * 40])
def test_production_refuses_a_weak_secret_key(monkeypatch: pytest.MonkeyPatch,
                                              key: str | None) -> None:
    monkeypatch.setenv("CURATION_ENV", "production")
    monkeypatch.delenv("CURATION_SECRET_KEY", raising=False)
    if key is not None:
        monkeypatch.setenv("CURATION_SECRET_KEY", key)
    with pytest.raises(RuntimeError, match="CURATION_SECRET_KEY"):
        create_app({"DATABASE_URL": "sqlite://"})


def test_production_starts_with_a_strong_key(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("CURATION_ENV", "production")
    monkeypatch.setenv("CURATION_SECRET_KEY", "3f9c1a7e5b2d8064c1e9a7f35b0d2e8c")
    app = create_app({"DATABASE_URL": "sqlite://"})
    assert app.config["SESSION_COOKIE_SECURE"] is True


PAYLOAD = '<script>alert(1)</script><b onmouseover="x">bold</b>'


def test_markup_typed_into_text_fields_comes_back_escaped(client: Any) -> None:
    # A refused login shows the typed username back; a finding's note field and the search box too.
    found = client.get("/items", query_string={"q": PAYLOAD}).text
    assert PAYLOAD not in found and "&lt;script&gt;" in found
    with client.session_transaction() as cookie:
        cookie.clear()
    page = client.post("/login", data={"username": PAYLOAD, "password": "x"}).text
    assert "<script>alert(1)" not in page and "&lt;script&gt;alert(1)" in page


def test_analysts_write_only_to_their_allocations_items(app: Flask, session: Session,
                                                        make_item: Any) -> None:
    outsider = logged_in(app, account(session, "an-out", "analyst"))
    item = make_item()
    answer = outsider.post(f"/custody/{item.code}/store", data={})
    assert answer.status_code == 403 and "allocations" in answer.text


def test_an_analyst_may_write_to_a_descendant_of_a_sub_allocations_item(
        session: Session, make_item: Any, operator: Person) -> None:
    from curation.services import access, allocations, items
    from tests.conftest import T0

    analyst, pi = account(session, "an-in", "analyst"), account(session, "pi-x", "curator")
    loan = allocations.open_allocation(session, actor=operator, reference="L-1", facility="F",
                                       investigator=pi, starts_at=T0)
    sub = allocations.open_allocation(session, actor=operator, reference="L-1a", facility="F",
                                      investigator=pi, starts_at=T0, parent=loan)
    allocations.add_member(session, actor=operator, allocation=loan, person=analyst)
    parent, child, other = make_item(), make_item(kind="lamella"), make_item()
    items.derive(session, actor=operator, parent=parent, child=child, derived_at=T0)
    allocations.issue_item(session, actor=operator, allocation=sub, item=parent, issued_at=T0)
    assert access.may_write_item(session, analyst, child)
    assert access.may_write_item(session, analyst, parent)
    assert not access.may_write_item(session, analyst, other)
    auditor = account(session, "au-x", "auditor")
    assert not access.may_write_item(session, auditor, parent)


def test_a_login_rehashes_a_password_stored_with_weaker_parameters(session: Session) -> None:
    from argon2 import PasswordHasher

    person, _ = accounts.create_account(session, actor="test", username="old", name="Old",
                                        role="curator", password="an old password here")
    person.password_hash = PasswordHasher(time_cost=1, memory_cost=8 * 1024).hash(
        "an old password here")
    session.flush()
    assert accounts.authenticate(session, "old", "an old password here") is person
    # Parameters as OWASP's Password Storage Cheat Sheet gives for Argon2id (19 MiB, t=2, p=1).
    assert person.password_hash.startswith("$argon2id$v=19$m=19456,t=2,p=1$")


def test_markup_stored_in_every_kind_of_text_comes_back_escaped(client: Any, session: Session,
                                                                make_item: Any,
                                                                operator: Person) -> None:
    from curation.services import controls, custody, events, stations, studies

    place = stations.add_location(session, actor=operator, code="XSS-ROOM", name=PAYLOAD,
                                  kind="glovebox", laboratory=PAYLOAD)
    item = make_item(code="XSS-1", material=PAYLOAD, description=PAYLOAD, is_pristine=True)
    study = studies.create_study(session, actor=operator, code="XSS-S", title=PAYLOAD)
    studies.enrol(session, actor=operator, study=study, item=item)
    step = events.record_event(session, actor=operator, kind="step", item=item,
                               occurred_at=item.created_at, technique="sem-imaging",
                               summary=PAYLOAD, note=PAYLOAD, details={PAYLOAD: PAYLOAD})
    custody.handle(session, actor=operator, item=item, environment="air",
                   start=item.created_at, end=item.created_at, location=place, note=PAYLOAD)
    witness = make_item(code="XSS-W", kind="witness-coupon")
    studies.enrol(session, actor=operator, study=study, item=witness, role="control")
    ind = controls.define_indicator(session, actor=operator, study=study, code="xss", name=PAYLOAD,
                                    unit=PAYLOAD, baseline_value=1, baseline_uncertainty=1,
                                    threshold_kind="absolute", threshold_value=0.5,
                                    baseline_source=PAYLOAD)
    controls.record_control_reading(session, actor=operator, indicator=ind, control=witness,
                                    measured_at=item.created_at, value=3, uncertainty=0.1,
                                    source=PAYLOAD)
    session.commit()
    for path in ("/items/XSS-1", f"/events/{step.id}", "/items?q=XSS", "/findings",
                 "/studies/XSS-S/controls", "/studies", "/custody/XSS-1"):
        page = client.get(path)
        assert page.status_code == 200, path
        assert "<script>alert(1)" not in page.text, path
        assert "&lt;script&gt;alert(1)" in page.text, path
