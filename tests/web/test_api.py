"""The JSON API: tokens, reading an item, posting files and steps with the form's messages,
the OpenAPI document, and a bounded schemathesis fuzz in which no request may cause a 500."""

from __future__ import annotations

import hashlib
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest
import schemathesis
from flask import Flask
from flask.testing import FlaskClient
from hypothesis import HealthCheck, Phase, settings
from schemathesis import checks as st_checks
from sqlalchemy import select
from sqlalchemy.orm import Session

from curation.model import ApiToken, Item, Person, Station
from curation.services import stations, tokens
from curation.web import openapi
from tests.conftest import hours


@pytest.fixture
def station(session: Session, operator: Person) -> Station:
    room = stations.add_location(session, actor=operator, code="API-RM", name="SEM room",
                                 kind="instrument")
    sem = stations.add_instrument(session, actor=operator, code="API-SEM", name="SEM",
                                  location=room, techniques="sem eds")
    return stations.add_station(session, actor=operator, code="API-ST", name="SEM PC",
                                instrument=sem, location=room)


@pytest.fixture
def token(session: Session, operator: Person, station: Station) -> str:
    return tokens.create_token(session, actor=operator, station=station, label="tests").token


@pytest.fixture
def share(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    folder = tmp_path / "share"
    folder.mkdir()
    monkeypatch.setenv("CURATION_DATA_ROOTS", str(folder))
    return folder


def auth(token: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {token}"}


def step_body(operator: Person, item: Item, **overrides: Any) -> dict[str, Any]:
    body = {"items": [item.code], "technique": "sem-imaging", "operator": operator.username,
            "occurred_at": "2026-03-02T10:00:00+01:00",
            "params": {"accelerating_voltage_kV": "5 kV", "beam_current_nA": "500 pA",
                       "detector": "secondary electron"}}
    return body | overrides


# ---- tokens -----------------------------------------------------------------------------


def test_only_the_tokens_hash_is_stored_and_revoked_tokens_are_refused(
        client: FlaskClient, session: Session, operator: Person, station: Station,
        make_item: Callable[..., Item]) -> None:
    made = tokens.create_token(session, actor=operator, station=station)
    row = session.scalar(select(ApiToken).where(ApiToken.id == made.row.id))
    assert row.token_sha256 == hashlib.sha256(made.token.encode()).hexdigest()
    assert made.token not in {row.label, row.token_sha256}
    item = make_item()
    assert client.get(f"/api/v1/items/{item.code}", headers=auth(made.token)).status_code == 200
    tokens.revoke_token(session, actor=operator, token_id=row.id)
    refused = client.get(f"/api/v1/items/{item.code}", headers=auth(made.token))
    assert refused.status_code == 401 and refused.headers["WWW-Authenticate"].startswith("Bearer")
    assert "authorization" in refused.json["errors"]
    for headers in ({}, {"Authorization": "Bearer nope"}, {"Authorization": made.token}):
        assert client.get(f"/api/v1/items/{item.code}", headers=headers).status_code == 401


def test_the_api_needs_no_form_token_but_the_pages_do(
        connection: Any, token: str, operator: Person, make_item: Callable[..., Item]) -> None:
    from curation import create_app

    app = create_app({"DB_BIND": connection, "TESTING": True, "SECRET_KEY": "t"})
    client, item = app.test_client(), make_item()
    answer = client.post("/api/v1/steps", json=step_body(operator, item), headers=auth(token))
    assert answer.status_code == 201, answer.json
    page = client.post(f"/items/{item.code}/files/path", data={"path-path": "/x"})
    assert page.status_code == 400 and "CSRF" in page.text


# ---- reading ----------------------------------------------------------------------------


def test_item_with_effective_history_and_files(
        client: FlaskClient, token: str, session: Session, operator: Person,
        make_item: Callable[..., Item], make_event: Callable[..., Any]) -> None:
    from curation.services import items as item_writes

    parent, child = make_item(code="API-P"), make_item(code="API-P-L1", kind="lamella",
                                                       created_at=hours(2))
    make_event(parent, 1, summary="before the cut")
    make_event(parent, 5, summary="after the cut")
    item_writes.derive(session, actor=operator, parent=parent, child=child, derived_at=hours(2))
    make_event(child, 3, summary="own")
    answer = client.get("/api/v1/items/API-P-L1", headers=auth(token)).json
    assert answer["item"]["code"] == "API-P-L1" and answer["item"]["kind"] == "lamella"
    # The resolver's rule: the parent's events up to the cut, and the child's own.
    assert [(e["summary"], e["reach"], e["path"]) for e in answer["history"]] == [
        ("before the cut", "ancestor", ["API-P-L1", "API-P"]), ("own", "own", ["API-P-L1"])]
    missing = client.get("/api/v1/items/NOPE", headers=auth(token))
    assert missing.status_code == 404 and "NOPE" in missing.json["errors"]["request"][0]


def test_technique_spec(client: FlaskClient, token: str) -> None:
    spec = client.get("/api/v1/techniques/sem-imaging", headers=auth(token)).json
    kv = next(f for f in spec["fields"] if f["name"] == "accelerating_voltage_kV")
    assert (kv["unit_symbol"], kv["required"], kv["typical_range"]) == ("kV", True, "0.5–30 kV")
    assert client.get("/api/v1/techniques/nope", headers=auth(token)).status_code == 404


# ---- posting a data file ----------------------------------------------------------------


def test_post_file_by_path(client: FlaskClient, token: str, operator: Person,
                           make_item: Callable[..., Item], share: Path) -> None:
    make_item(code="APIF-1")
    second = make_item(code="APIF-2")
    (share / "run.dat").write_bytes(b"counts")
    body = {"path": str(share / "run.dat"), "operator": operator.username, "technique": "eds"}
    made = client.post("/api/v1/items/APIF-1/files", json=body, headers=auth(token))
    assert made.status_code == 201 and made.json["sha256"] == hashlib.sha256(b"counts").hexdigest()
    again = client.post("/api/v1/items/APIF-1/files", json=body, headers=auth(token))
    assert again.status_code == 200 and again.json["id"] == made.json["id"]
    clash = client.post("/api/v1/items/APIF-2/files", json=body, headers=auth(token))
    assert clash.status_code == 409
    assert "APIF-1" in clash.json["errors"]["request"][0] and "APIF-2" in clash.text
    outside = client.post("/api/v1/items/APIF-2/files", headers=auth(token),
                          json=body | {"path": "/etc/hostname"})
    assert outside.status_code == 400 and "inside" in outside.json["errors"]["path"][0]
    assert second.code == "APIF-2"


def test_post_file_without_configured_roots_is_refused(
        client: FlaskClient, token: str, operator: Person, make_item: Callable[..., Item],
        monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("CURATION_DATA_ROOTS", raising=False)
    answer = client.post(f"/api/v1/items/{make_item().code}/files", headers=auth(token),
                         json={"path": "/etc/hostname", "operator": operator.username})
    assert answer.status_code == 400 and "CURATION_DATA_ROOTS" in answer.json["errors"]["path"][0]


# ---- posting a step ---------------------------------------------------------------------


def test_post_step_and_repeat(client: FlaskClient, token: str, operator: Person,
                              make_item: Callable[..., Item]) -> None:
    item = make_item()
    body = step_body(operator, item, submission_key="k-1")
    made = client.post("/api/v1/steps", json=body, headers=auth(token))
    assert made.status_code == 201, made.json
    event = made.json["events"][0]
    assert (event["station"], event["technique"], event["item"]) == ("API-ST", "sem-imaging",
                                                                       item.code)
    assert event["details"]["beam_current_nA"] == 0.5
    again = client.post("/api/v1/steps", json=body, headers=auth(token))
    assert again.status_code == 200 and again.json["is_repeat"]
    assert again.json["events"][0]["id"] == event["id"]


def test_step_refusals_name_each_field(client: FlaskClient, token: str, operator: Person,
                                       make_item: Callable[..., Item]) -> None:
    item = make_item()
    params = {"accelerating_voltage_kV": "80", "beam_current_nA": "3 mm", "detector": "x"}
    answer = client.post("/api/v1/steps", json=step_body(operator, item, params=params),
                         headers=auth(token))
    assert answer.status_code == 400
    errors = answer.json["errors"]
    assert set(errors) == {"accelerating_voltage_kV", "beam_current_nA", "detector"}
    assert "allowed range above 0 and up to 50 kV" in errors["accelerating_voltage_kV"][0]
    assert "is a length" in errors["beam_current_nA"][0]
    shape = client.post("/api/v1/steps", headers=auth(token), json={
        "items": "not a list", "technique": 3, "extra": True})
    assert shape.status_code == 400
    assert {"items", "technique", "extra", "operator", "occurred_at", "params"} <= set(
        shape.json["errors"])
    naive = client.post("/api/v1/steps", headers=auth(token), json=step_body(
        operator, item, occurred_at="2026-03-02T10:00"))
    assert naive.status_code == 400 and "UTC offset" in naive.json["errors"]["occurred_at"][0]
    other = client.post("/api/v1/steps", headers=auth(token), json=step_body(
        operator, item, technique="apt"))
    assert other.status_code == 400 and "not run by instrument API-SEM" in other.text
    ghost = client.post("/api/v1/steps", headers=auth(token), json=step_body(
        operator, item, items=["GHOST-1"]))
    assert ghost.status_code == 400 and "GHOST-1" in ghost.json["errors"]["items"][0]


def test_warnings_need_confirmation(client: FlaskClient, token: str, operator: Person,
                                    make_item: Callable[..., Item]) -> None:
    item = make_item()
    params = {"accelerating_voltage_kV": "40", "beam_current_nA": "1",
              "detector": "in_column"}
    first = client.post("/api/v1/steps", json=step_body(operator, item, params=params),
                        headers=auth(token))
    assert first.status_code == 409
    assert first.json["warnings"][0]["field"] == "accelerating_voltage_kV"
    assert "outside the typical range 0.5–30 kV" in first.json["errors"][
        "accelerating_voltage_kV"][0]
    confirmed = client.post("/api/v1/steps", headers=auth(token), json=step_body(
        operator, item, params=params, confirm_warnings=True))
    assert confirmed.status_code == 201
    assert confirmed.json["warnings"] == [first.json["warnings"][0]["message"]]


# ---- the document and the fuzz ----------------------------------------------------------


def test_openapi_document_is_served_without_a_token(client: FlaskClient) -> None:
    doc = client.get("/api/v1/openapi.json").json
    assert doc["openapi"].startswith("3.") and set(doc["paths"]) == {
        "/items/{code}", "/items/{code}/files", "/steps", "/techniques/{code}"}
    # One description: the document's body schema is the one the checker applies.
    schema = doc["paths"]["/steps"]["post"]["requestBody"]["content"]["application/json"]
    assert schema["schema"]["required"] == [n for n, p in openapi.STEP.items() if p.required]


@pytest.fixture
def fuzz_app(app: Flask, share: Path, make_item: Callable[..., Item]) -> Flask:
    make_item(code="FUZZ-1")
    (share / "one.dat").write_bytes(b"1")
    return app


# The document is pure code, so the schema loads at import; requests go to the app in-process.
fuzzed = schemathesis.openapi.from_dict(openapi.document())
# Valid and invalid bodies, paths and headers alike: neither may ever answer 500.
fuzzed.config.generation.update(modes=list(schemathesis.GenerationMode))


@fuzzed.parametrize()
@settings(max_examples=30, deadline=None, database=None, derandomize=True,
          phases=[Phase.explicit, Phase.generate],
          suppress_health_check=list(HealthCheck))
def test_fuzz_no_server_errors(case: Any, fuzz_app: Flask, token: str) -> None:
    # Bounded: 30 examples per operation, through WSGI, nothing over the network.
    case.call_and_validate(app=fuzz_app, headers=auth(token), checks=[
        st_checks.not_a_server_error, st_checks.status_code_conformance,
        st_checks.content_type_conformance, st_checks.response_schema_conformance])
