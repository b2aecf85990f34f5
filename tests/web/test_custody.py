"""The custody desk and the environment page through the Flask test client."""

from __future__ import annotations

import io
import re
from dataclasses import dataclass
from html import unescape
from typing import Any

import pytest
from flask.testing import FlaskClient
from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import create_app, ledger
from curation.model import EnvironmentReading, Event, Item, Location, Person
from curation.services import accounts, custody, stations
from tests.conftest import hours
from tests.web.conftest import logged_in
from tests.web.test_items import page


@dataclass
class Desk:
    """Two people, a store, a glovebox and a particle."""

    ann: Person
    ben: Person
    store: Location
    box: Location
    item: Item


@pytest.fixture
def desk(session: Session, operator: Person, make_item: Any) -> Desk:
    ann = accounts.add_person(session, actor=operator, username="ann", name="Ann Custodian")
    ben = accounts.add_person(session, actor=operator, username="ben", name="Ben Receiver")
    store = stations.add_location(session, actor=operator, code="ST-1", name="Dry cabinet 1",
                                  kind="store")
    box = stations.add_location(session, actor=operator, code="GB-1", name="Glovebox 1",
                                kind="glovebox")
    item = make_item(code="CU-1", is_pristine=True)
    session.commit()
    return Desk(ann, ben, store, box, item)


def events_of(session: Session, item: Item) -> list[Event]:
    return list(session.scalars(select(Event).where(Event.item_id == item.id)
                                .order_by(Event.id)))


def post(client: FlaskClient, url: str, data: dict[str, Any], status: int = 302,
         **kwargs: Any) -> str:
    response = client.post(url, data=data, **kwargs)
    assert response.status_code == status, response.get_data(as_text=True)[:3000]
    return response.get_data(as_text=True)


def error_of(html: str, field_id: str) -> str:
    """The text of the error list beside one field (empty when there is none)."""
    found = re.search(rf'<ul class="field-errors" id="{re.escape(field_id)}-error">(.*?)</ul>',
                      html, re.DOTALL)
    return unescape(re.sub(r"<[^>]+>", "", found.group(1))) if found else ""


def stamp(prefix: str, name: str = "at", when: str = "2026-03-02T09:00",
          offset: str = "+01:00") -> dict[str, str]:
    return {f"{prefix}-{name}": when, f"{prefix}-{name}-offset": offset}


# ---- scanning -------------------------------------------------------------------------


def test_scan_field_is_focused_and_a_code_opens_the_desk(client: FlaskClient,
                                                         desk: Desk) -> None:
    html = page(client, "/custody")
    assert re.search(r'<input id="code"[^>]*autofocus', html)
    response = client.get("/custody?code=CU-1")
    assert response.status_code == 302 and response.headers["Location"].endswith("/custody/CU-1")
    html = page(client, "/custody/CU-1")
    assert "nobody on record" in html and "Hand-over: release" in html


def test_unknown_code_is_refused_beside_the_scan_field(client: FlaskClient) -> None:
    html = page(client, "/custody?code=NOPE-3", status=404)
    assert "NOPE-3" in error_of(html, "code") and "Item code" in error_of(html, "code")


# ---- every desk form writes its one event ---------------------------------------------


FORMS: dict[str, tuple[dict[str, Any], dict[str, Any]]] = {
    "release": ({"release-to": "ben", "release-location": "ST-1", **stamp("release")},
                {"kind": "custody", "action": "release", "summary": "released to Ben Receiver"}),
    "receipt": ({"receipt-giver": "ann", "receipt-condition": "vial intact",
                 **stamp("receipt")},
                {"kind": "custody", "action": "receipt", "details": {"condition": "vial intact"}}),
    "store": ({"store-location": "ST-1", "store-slot": "B4", **stamp("store")},
              {"action": "store", "details": {"slot": "B4"}}),
    "seal": ({"seal-action": "seal-checked", "seal-seal_id": "S-77", "seal-intact": "no",
              **stamp("seal")},
             {"action": "seal-checked", "details": {"seal_id": "S-77", "intact": False}}),
    "ship": ({"ship-carrier": "Courier A", "ship-tracking_id": "TR-9", "ship-recipient": "ben",
              **stamp("ship")},
             {"action": "shipped", "details": {"carrier": "Courier A", "tracking_id": "TR-9"}}),
    "deliver": ({"deliver-condition": "box dented, seal whole", **stamp("deliver")},
                {"action": "delivered", "details": {"condition": "box dented, seal whole"}}),
    "inventory": ({"inventory-location": "ST-1", "inventory-found": "no",
                   **stamp("inventory")},
                  {"action": "inventory-check", "details": {"found": False}}),
    "handling": ({"handling-environment": "n2-glovebox", "handling-location": "GB-1",
                  **stamp("handling", "start"), **stamp("handling", "end", "2026-03-02T09:40"),
                  "handling-o2_ppm": "0.4", "handling-h2o_ppm": "0.6",
                  "handling-contact_materials": ["ptfe", "tungsten"],
                  "handling-tools": "tweezers T3 (lot 14), probe P1",
                  "handling-controls": "WC-1"},
                 {"kind": "handling", "environment": "n2-glovebox", "summary": "n2-glovebox for 40 min",
                  "details": {"o2_ppm": 0.4, "h2o_ppm": 0.6,
                              "contact_materials": ["ptfe", "tungsten"],
                              "tools": ["tweezers T3 (lot 14)", "probe P1"],
                              "controls": ["WC-1"]}}),
}


@pytest.mark.parametrize("action", FORMS)
def test_each_form_writes_exactly_its_event_and_the_ledger_holds(
        action: str, client: FlaskClient, desk: Desk, session: Session) -> None:
    data, expected = FORMS[action]
    before = events_of(session, desk.item)
    response = client.post(f"/custody/CU-1/{action}", data={f"{action}-operator": "ann", **data})
    assert response.status_code == 302, response.get_data(as_text=True)[:3000]
    assert response.headers["Location"].endswith("/custody/CU-1#now")
    after = events_of(session, desk.item)
    assert len(after) == len(before) + 1
    event = after[-1]
    assert event.actor_id == desk.ann.id
    for name, value in expected.items():
        assert getattr(event, name) == value, name
    at = event.occurred_at
    assert at.utcoffset() is not None and at == hours(0)  # 09:00 at +01:00 is 08:00 UTC
    assert ledger.verify(session).ok
    shown = page(client, "/custody/CU-1")
    assert f"Recorded event #{event.id} on CU-1" in shown  # the flash after the redirect


def test_release_then_receipt_makes_the_recipient_custodian(
        client: FlaskClient, desk: Desk) -> None:
    post(client, "/custody/CU-1/release",
         {"release-operator": "ann", "release-to": "ben", **stamp("release")})
    html = page(client, "/custody/CU-1")
    pending = html[html.index('id="pending"'):html.index("Custody location")]
    assert "Ben Receiver" in pending and "not yet received" in pending
    post(client, "/custody/CU-1/receipt", {"receipt-operator": "ben", "receipt-giver": "ann",
                                           "receipt-location": "ST-1",
                                           **stamp("receipt", when="2026-03-02T09:10")})
    html = page(client, "/custody/CU-1")
    custodian = html[html.index('id="custodian"'):html.index("Pending hand-over")]
    assert "Ben Receiver" in custodian
    assert "Dry cabinet 1" in html[html.index('id="custody-location"'):]
    assert "none" in html[html.index('id="pending"'):html.index("Custody location")]


def test_seals_in_place_and_a_finding_beside_its_custody_event(
        client: FlaskClient, desk: Desk) -> None:
    post(client, "/custody/CU-1/seal", {"seal-operator": "ann", "seal-action": "seal-applied",
                                        "seal-seal_id": "S-1", **stamp("seal")})
    post(client, "/custody/CU-1/seal", {"seal-operator": "ann", "seal-action": "seal-checked",
                                        "seal-seal_id": "S-2", **stamp("seal")})
    html = page(client, "/custody/CU-1")
    assert "S-1" in html[html.index('id="seals"'):html.index("Chain of custody")]
    assert "seal-mismatch" in html[html.index("Chain of custody"):]


# ---- refusals -------------------------------------------------------------------------


def test_a_time_without_offset_is_refused_naming_the_field(
        client: FlaskClient, desk: Desk, session: Session) -> None:
    html = post(client, "/custody/CU-1/release",
                {"release-operator": "ann", "release-to": "ben", "release-at": "2026-03-02T09:00"},
                status=400)
    message = error_of(html, "release-at")
    assert "Time of release" in message and "no UTC offset" in message
    assert events_of(session, desk.item) == []


@pytest.mark.parametrize(("action", "data", "field", "words"), [
    ("release", {"release-to": "ben", **stamp("release")}, "release-operator", "Operator"),
    ("release", {"release-operator": "ann", **stamp("release")}, "release-to", "Released to"),
    ("release", {"release-operator": "ann", "release-to": "ben",
                 **stamp("release", when="yesterday")}, "release-at", "not a date and time"),
    ("store", {"store-operator": "ann", "store-location": "NOWHERE", **stamp("store")},
     "store-location", "Store"),
    ("seal", {"seal-operator": "ann", "seal-action": "seal-applied", "seal-seal_id": "   ",
              **stamp("seal")}, "seal-seal_id", "the id printed on the seal"),
    ("ship", {"ship-operator": "ann", "ship-carrier": "  ", **stamp("ship")}, "ship-carrier",
     "the carrier's name"),
    ("deliver", {"deliver-operator": "ann", **stamp("deliver")}, "deliver-condition",
     "Condition of the package"),
    ("inventory", {"inventory-operator": "ann", "inventory-location": "ST-1",
                   **stamp("inventory")}, "inventory-found", "Found there?"),
    ("handling", {"handling-operator": "ann", "handling-environment": "air",
                  **stamp("handling", "start", "2026-03-02T10:00"),
                  **stamp("handling", "end", "2026-03-02T09:00")}, "handling-end",
     "the end is before the start"),
    ("handling", {"handling-operator": "ann", "handling-environment": "cleanroom",
                  "handling-iso_class": "12", **stamp("handling", "start"),
                  **stamp("handling", "end")}, "handling-iso_class", "from 1 to 9"),
    ("handling", {"handling-operator": "ann", "handling-environment": "air",
                  "handling-contact_materials": ["chewing-gum"], **stamp("handling", "start"),
                  **stamp("handling", "end")}, "handling-contact_materials",
     "Contact materials"),
])
def test_refusals_name_the_field_and_write_nothing(
        action: str, data: dict[str, Any], field: str, words: str, client: FlaskClient,
        desk: Desk, session: Session) -> None:
    html = post(client, f"/custody/CU-1/{action}", data, status=400)
    assert words in error_of(html, field), error_of(html, field) or html[:3000]
    assert f'id="form-{action}" class="panel desk-form desk-form-invalid"' in html
    assert events_of(session, desk.item) == []
    assert ledger.verify(session).ok


def test_a_post_without_the_form_token_is_refused(connection: Any, desk: Desk,
                                                  session: Session, admin: Person) -> None:
    guarded = create_app({"DB_BIND": connection, "TESTING": True, "SECRET_KEY": "t"})
    client = logged_in(guarded, admin)
    response = client.post("/custody/CU-1/release", data={
        "release-operator": "ann", "release-to": "ben", **stamp("release")})
    assert response.status_code == 400
    assert "CSRF" in response.get_data(as_text=True)
    assert events_of(session, desk.item) == []
    # The pages themselves carry the token, so a real browser gets through.
    assert 'name="release-csrf_token"' in page(client, "/custody/CU-1")


def test_an_unknown_desk_action_is_a_404(client: FlaskClient, desk: Desk) -> None:
    assert client.post("/custody/CU-1/teleport", data={}).status_code == 404


def test_a_contained_item_names_the_container_that_holds_custody(
        client: FlaskClient, desk: Desk, session: Session, make_item: Any,
        operator: Person) -> None:
    from curation.services import items

    capsule = make_item(code="CU-CAP", kind="capsule")
    items.place(session, actor=operator, item=desk.item, container=capsule, placed_at=hours(0))
    custody.release(session, actor=desk.ann, item=capsule, to=desk.ben, at=hours(1))
    custody.receive(session, actor=desk.ben, item=capsule, giver=desk.ann, at=hours(1.1))
    session.commit()
    html = page(client, "/custody/CU-1")
    assert "Ben Receiver" in html[html.index('id="custodian"'):html.index("Pending hand-over")]
    assert "outermost container" in html and "CU-CAP" in html
    assert "recorded on CU-CAP" in html


# ---- environment ----------------------------------------------------------------------


def readings_of(session: Session, place: Location) -> list[EnvironmentReading]:
    return list(session.scalars(select(EnvironmentReading).where(
        EnvironmentReading.location_id == place.id).order_by(EnvironmentReading.id)))


def test_environment_picks_a_place(client: FlaskClient, desk: Desk) -> None:
    html = page(client, "/custody/environment")
    assert "GB-1" in html
    response = client.get("/custody/environment?location=GB-1")
    assert response.headers["Location"].endswith("/custody/environment/GB-1")
    assert "No readings yet" in page(client, "/custody/environment/GB-1")
    page(client, "/custody/environment/NOPE", status=404)


def test_particle_counts_give_the_iso_class_and_the_deciding_channel(
        client: FlaskClient, desk: Desk, session: Session) -> None:
    # ISO 14644-1:2015 Table 1, class 5: 3 520 at >= 0.5 um and 832 at >= 1 um; 900 at
    # >= 1 um needs class 5.1, while 3 000 at >= 0.5 um fits class 5.
    post(client, "/custody/environment/GB-1/counts", {
        "counts-operator": "ann", **stamp("counts", "measured_at"),
        "counts-c0_5": "3000", "counts-c1": "900", "counts-counter": "OPC-2"})
    [reading] = readings_of(session, desk.box)
    assert reading.iso_class == pytest.approx(5.1)
    html = page(client, "/custody/environment/GB-1")
    assert "ISO class 5.1 for Glovebox 1, decided by the ≥ 1 µm channel" in html  # the flash
    table = html[html.index('id="readings"'):]
    assert "ISO class 5.1" in table and "≥ 1 µm channel" in table
    assert ledger.verify(session).ok


def test_counts_need_a_channel_and_a_class_at_most_9(client: FlaskClient, desk: Desk,
                                                      session: Session) -> None:
    html = post(client, "/custody/environment/GB-1/counts",
                {"counts-operator": "ann", **stamp("counts", "measured_at")}, status=400)
    assert "at least one size channel" in html
    html = post(client, "/custody/environment/GB-1/counts",
                {"counts-operator": "ann", **stamp("counts", "measured_at"),
                 "counts-c0_5": "-4"}, status=400)
    assert "must be 0 or more" in error_of(html, "counts-c0_5")
    html = post(client, "/custody/environment/GB-1/counts",
                {"counts-operator": "ann", **stamp("counts", "measured_at"),
                 "counts-c5": "1e12"}, status=400)
    assert "ISO class 9" in html
    assert readings_of(session, desk.box) == []


def test_atmosphere_and_climate_readings(client: FlaskClient, desk: Desk,
                                         session: Session) -> None:
    post(client, "/custody/environment/GB-1/atmosphere", {
        "atmosphere-operator": "ann", **stamp("atmosphere", "measured_at"),
        "atmosphere-o2_ppm": "0.8", "atmosphere-h2o_ppm": "1.2"})
    post(client, "/custody/environment/ST-1/climate", {
        "climate-operator": "ann", **stamp("climate", "measured_at"),
        "climate-temperature_C": "21.5", "climate-humidity_pct": "38"})
    [gas] = readings_of(session, desk.box)
    [air] = readings_of(session, desk.store)
    assert (gas.o2_ppm, gas.h2o_ppm) == (0.8, 1.2)
    assert (air.temperature_C, air.humidity_pct) == (21.5, 38)
    assert "O₂ 0.8 ppm, H₂O 1.2 ppm" in page(client, "/custody/environment/GB-1")
    assert "21.5 °C, 38 % RH" in page(client, "/custody/environment/ST-1")
    html = post(client, "/custody/environment/ST-1/climate", {
        "climate-operator": "ann", **stamp("climate", "measured_at"),
        "climate-temperature_C": "900", "climate-humidity_pct": "38"}, status=400)
    assert "-200 to 200" in error_of(html, "climate-temperature_C")
    assert ledger.verify(session).ok


def upload(text: str) -> tuple[io.BytesIO, str]:
    return io.BytesIO(text.encode()), "box-log.csv"


def test_a_good_glovebox_log_imports_every_row(client: FlaskClient, desk: Desk,
                                               session: Session) -> None:
    log = ("measured_at,o2_ppm,h2o_ppm\n2026-03-02T09:00:00+01:00,0.5,0.7\n"
           "2026-03-02T09:05:00+01:00,0.6,0.8\n")
    post(client, "/custody/environment/GB-1/log",
         {"log-operator": "ann", "log-file": upload(log)}, content_type="multipart/form-data")
    assert [r.o2_ppm for r in readings_of(session, desk.box)] == [0.5, 0.6]
    assert "Imported 2 atmosphere reading(s)" in page(client, "/custody/environment/GB-1")
    assert ledger.verify(session).ok


def test_a_bad_glovebox_log_lists_every_bad_line_and_writes_nothing(
        client: FlaskClient, desk: Desk, session: Session) -> None:
    log = ("measured_at,o2_ppm,h2o_ppm\n2026-03-02T09:00:00+01:00,0.5,0.7\n"
           "2026-03-02T09:05:00,0.6,0.8\n2026-03-02T09:10:00+01:00,lots,0.8\n"
           "2026-03-02T09:15:00+01:00,0.5,-3\n")
    html = post(client, "/custody/environment/GB-1/log",
                {"log-operator": "ann", "log-file": upload(log)}, status=400,
                content_type="multipart/form-data")
    problems = error_of(html, "log-file")
    for line, words in ((3, "no timezone offset"), (4, "o2_ppm 'lots' is not a number"),
                        (5, "h2o_ppm -3 is outside")):
        assert f"line {line}: " in problems and words in problems
    assert "line 2" not in problems
    assert readings_of(session, desk.box) == []
    html = post(client, "/custody/environment/GB-1/log",
                {"log-operator": "ann", "log-file": upload("when,o2\n")}, status=400,
                content_type="multipart/form-data")
    assert "missing column(s) measured_at, o2_ppm, h2o_ppm" in error_of(html, "log-file")


def test_the_chain_of_custody_lists_every_custody_event(
        client: FlaskClient, desk: Desk, session: Session) -> None:
    for n in range(5):
        custody.release(session, actor=desk.ann, item=desk.item, to=desk.ben, at=hours(n))
        custody.receive(session, actor=desk.ben, item=desk.item, giver=desk.ann,
                        at=hours(n + 0.1))
    session.commit()
    html = page(client, "/custody/CU-1")
    chain = html[html.index("Chain of custody"):html.index('aria-label="Record"')]
    assert chain.count('<li id="custody-') == 10
    assert "Ben Receiver" in html[html.index('id="custodian"'):html.index("Pending hand-over")]
