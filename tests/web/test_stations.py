"""The station page through the Flask test client: scanning, the generated form, every refusal
beside its field, the confirmation round, double submits and what the page shows after."""

from __future__ import annotations

import re
from dataclasses import dataclass
from html import unescape
from typing import Any

import pytest
from flask.testing import FlaskClient
from scipy import constants
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from curation import create_app, ledger
from curation.model import Event, Item, Person
from curation.services import items, stations
from curation.web.stations import sci
from tests.conftest import T0
from tests.web.test_custody import error_of, post
from tests.web.test_items import _cost, page

URL = "/stations/ST-FIB"


@dataclass
class Bench:
    operator: Person
    wedge: Item
    coupon: Item
    needles: list[Item]


@pytest.fixture
def bench(session: Session, operator: Person, make_item: Any) -> Bench:
    room = stations.add_location(session, actor=operator, code="RM-2", name="Beam room 2",
                                 kind="instrument")
    fib = stations.add_instrument(session, actor=operator, code="FIB-A", name="Dual-beam A",
                                  location=room, techniques="fib sem")
    stations.add_station(session, actor=operator, code="ST-FIB", name="Dual-beam PC",
                         instrument=fib, location=room)
    wedge = make_item(code="KR-7-W1", kind="wedge", material="olivine")
    coupon = make_item(code="CPN-5", kind="coupon")
    needles = [make_item(code=f"KR-7-N{n}", kind="needle") for n in (1, 2)]
    for n, needle in enumerate(needles, 1):
        items.place(session, actor=operator, item=needle, container=coupon, placed_at=T0,
                    position=f"post-{n:02d}")
    session.commit()
    return Bench(operator, wedge, coupon, needles)


def sharpening(bench: Bench, key: str = "key-1", **changes: str) -> dict[str, str]:
    """A complete needle-sharpening post: three needles from the wedge onto posts 3 to 5."""
    data = {"technique": "fib-needle-sharpening", "items": bench.wedge.code,
            "submission_key": key, "operator": bench.operator.username,
            "started": "2026-03-02T10:00", "started-offset": "+01:00",
            "ended": "2026-03-02T10:30", "ended-offset": "+01:00",
            "p_ion_species": "Ga", "p_accelerating_voltage_kV": "30",
            "p_beam_current_nA": "90 pA", "p_needle_count": "3", "p_exposure_time_s": "600",
            "p_exposed_area_um2": "4", "coupon": bench.coupon.code, "first_post": "3"}
    data.update(changes)
    return {k: v for k, v in data.items() if v is not None}


def steps_written(session: Session) -> int:
    return session.scalar(select(func.count()).select_from(Event)
                          .where(Event.kind == "step")) or 0


def text(html: str) -> str:
    return " ".join(unescape(re.sub(r"<[^>]+>", " ", html)).split())


def beside(html: str, field_id: str) -> str:
    """The error shown beside a field, whitespace folded."""
    return " ".join(error_of(html, field_id).split())


# ---- the page -------------------------------------------------------------------------


def test_station_list_names_instrument_place_and_techniques(client: FlaskClient,
                                                            bench: Bench) -> None:
    shown = text(page(client, "/stations"))
    assert "ST-FIB Dual-beam PC Dual-beam A ( FIB-A ) Beam room 2 ( RM-2 )" in shown
    assert "sem-imaging, eds" not in shown and "fib-trench" in shown


def test_scan_field_is_focused_and_the_instruments_technique_preselected(
        client: FlaskClient, bench: Bench) -> None:
    html = page(client, URL)
    assert re.search(r'<input id="scan"[^>]*autofocus', html, re.DOTALL)
    # "fib sem": the catalogue order puts sem-imaging first
    assert re.search(r'<option value="sem-imaging" selected>', html)
    assert "Scan at least one item" in html
    assert "Caution:" in html and "interlocks" in html


def test_scanning_adds_items_and_a_coupon_offers_what_stands_on_it(
        client: FlaskClient, session: Session, bench: Bench) -> None:
    scanned = client.get(f"{URL}?item={bench.wedge.code}&scan={bench.wedge.code}"
                         "&technique=fib-needle-sharpening")
    assert scanned.status_code == 302  # a reload of the next page does not scan again
    assert scanned.headers["Location"] == (f"{URL}?item={bench.wedge.code}"
                                           "&technique=fib-needle-sharpening")
    html = page(client, scanned.headers["Location"])
    assert f'name="items" type="hidden" value="{bench.wedge.code}"' in html
    offered = page(client, f"{URL}?item={bench.wedge.code}&scan={bench.coupon.code}")
    assert "Coupon CPN-5 holds 2 items" in text(offered)
    assert re.findall(r'name="item" value="(KR-7-N\d)" id="offer-\d" checked', offered) == [
        "KR-7-N1", "KR-7-N2"]
    items.set_status(session, actor=bench.operator, item=bench.needles[1], status="consumed")
    session.commit()
    offered = page(client, f"{URL}?scan={bench.coupon.code}")
    assert re.findall(r'name="item" value="(KR-7-N\d)" id="offer-\d" checked', offered) == [
        "KR-7-N1"]  # a consumed needle is offered, not ticked
    both = page(client, f"{URL}?item={bench.wedge.code}&item=KR-7-N1&item=KR-7-N2"
                        "&technique=sem-imaging")
    assert 'value="KR-7-W1 KR-7-N1 KR-7-N2"' in both and "on 3 items" in both


def test_unknown_code_is_named_beside_the_scan_field(client: FlaskClient, bench: Bench) -> None:
    html = page(client, f"{URL}?scan=NOPE-1", status=404)
    assert beside(html, "scan") == "✋ Item code: No item has the code 'NOPE-1'."


def test_technique_not_on_the_instrument_is_refused_naming_what_it_runs(
        client: FlaskClient, bench: Bench) -> None:
    html = page(client, f"{URL}?item={bench.wedge.code}&technique=apt", status=400)
    said = beside(html, "technique")
    assert said.startswith("✋ Technique: apt is not run by instrument FIB-A; it runs: ")
    assert "fib-needle-sharpening" in said and 'action="/stations/ST-FIB/record"' not in html


def test_form_is_built_from_the_spec_with_units_and_typical_ranges(
        client: FlaskClient, bench: Bench) -> None:
    html = page(client, f"{URL}?item={bench.wedge.code}&technique=fib-needle-sharpening")
    assert re.search(r'id="p_accelerating_voltage_kV"[^>]*>\s*<span class="unit"[^>]*>kV<',
                     html)
    assert "Typical 2–30 kV." in html and "Typical 0.01–1 nA." in html
    assert re.search(r'<select[^>]*id="p_ion_species"', html)
    assert 'id="coupon"' in html and 'id="first_post"' in html
    assert "KR-7-W1-N1 for a needle" in html
    key = re.search(r'name="submission_key" type="hidden" value="([0-9a-f]{32})"', html)
    assert key is not None


# ---- refusals, each beside its field --------------------------------------------------


@pytest.mark.parametrize("changes, field, said", [
    ({"p_accelerating_voltage_kV": "99"}, "p_accelerating_voltage_kV",
     "Accelerating voltage: '99' is not allowed (allowed range above 0 and up to 50 kV)"),
    ({"p_beam_current_nA": "30 kV"}, "p_beam_current_nA",
     "Beam current: '30 kV' is not allowed (a value in nA (a current); '30 kV' is a voltage)"),
    ({"p_needle_count": ""}, "p_needle_count", "Needles made: required"),
    ({"coupon": "CPN-404"}, "coupon",
     ("Coupon or grid code: 'CPN-404' is not allowed (the code of a coupon or grid; "
      "no item has this code)")),
    ({"first_post": "2"}, "first_post",
     "First post: 2 is not allowed (free posts: post-02 of CPN-5 already holds KR-7-N2)"),
])
def test_refusals_come_back_beside_the_field_and_write_nothing(
        client: FlaskClient, session: Session, bench: Bench, changes: dict[str, str],
        field: str, said: str) -> None:
    html = post(client, f"{URL}/record", sharpening(bench, **changes), status=400)
    assert beside(html, field) == f"✋ {said}"
    tag = re.search(rf'<(?:input|select)[^>]*\bid="{field}"[^>]*>', html)
    assert tag is not None and " autofocus" in tag.group(0)  # the field to fix has the focus
    assert not re.search(r'<input id="scan"[^>]*autofocus', html, re.DOTALL)
    assert steps_written(session) == 0


def test_unknown_item_code_in_a_post_writes_nothing(client: FlaskClient, session: Session,
                                                    bench: Bench) -> None:
    html = post(client, f"{URL}/record", sharpening(bench, items="KR-7-W1 GONE-3"), status=400)
    assert beside(html, "scan") == "✋ Item code: No item has the code 'GONE-3'."
    assert steps_written(session) == 0


def test_out_of_typical_needs_the_confirmation_box(client: FlaskClient, session: Session,
                                                  bench: Bench) -> None:
    data = sharpening(bench, p_beam_current_nA="3")
    html = post(client, f"{URL}/record", data, status=200)
    assert "Check: 3 nA is outside the typical range 0.01–1 nA." in text(html)
    assert re.search(r'<input type="checkbox" id="confirm" name="confirm" value="y" autofocus>',
                     html)
    assert not re.search(r'<input id="scan"[^>]*autofocus', html, re.DOTALL)
    assert steps_written(session) == 0
    post(client, f"{URL}/record", {**data, "confirm": "y"})
    event = session.scalars(select(Event).where(Event.kind == "step")).one()
    assert event.details["beam_current_nA"] == 3
    assert "Confirmed outside the typical range" in event.note


# ---- recording ------------------------------------------------------------------------


def test_record_shows_what_was_written_and_a_double_submit_writes_once(
        client: FlaskClient, session: Session, bench: Bench) -> None:
    data = sharpening(bench)
    first = client.post(f"{URL}/record", data=data)
    assert first.status_code == 302
    assert first.headers["Location"].endswith(
        "/stations/ST-FIB?technique=fib-needle-sharpening&done=key-1")
    again = client.post(f"{URL}/record", data=data)
    assert again.status_code == 302
    assert steps_written(session) == 1
    html = page(client, first.headers["Location"])
    shown = text(html)
    assert "Recorded 1 step event(s); made KR-7-W1-N1, KR-7-W1-N2, KR-7-W1-N3." in shown
    assert "Already recorded: this submission was sent twice" in shown
    for n, post_no in ((1, 3), (2, 4), (3, 5)):
        assert f'href="/items/KR-7-W1-N{n}"' in html
        assert f"KR-7-W1-N{n} on post-0{post_no} of CPN-5" in shown
    # Ga+, 90 pA × 600 s over 4 µm², CODATA e from scipy: 8.43 × 10¹⁸ ions/cm²
    fluence = 0.09e-9 * 600 / (constants.e * 4e-8)
    assert f"{fluence:.2e}" == "8.43e+18" and "ion fluence 8.43 × 10¹⁸ ions/cm²" in shown
    assert re.search(r'<input id="scan"[^>]*autofocus', html, re.DOTALL)  # ready for the next
    assert 'name="items" type="hidden" value=""' not in html  # the session starts empty
    assert ledger.verify(session).ok


def test_item_page_shows_the_dose_beside_the_step(client: FlaskClient, session: Session,
                                                  bench: Bench) -> None:
    data = {"technique": "sem-imaging", "items": "KR-7-N1 KR-7-N2", "submission_key": "s-2",
            "operator": bench.operator.username, "started": "2026-03-02T10:00",
            "started-offset": "+00:00", "p_accelerating_voltage_kV": "5",
            "p_beam_current_nA": "1", "p_detector": "secondary_electron",
            "p_exposure_time_s": "1", "p_exposed_area_um2": "1"}
    post(client, f"{URL}/record", data)
    assert steps_written(session) == 2
    for code in ("KR-7-N1", "KR-7-N2"):
        shown = text(page(client, f"/items/{code}"))
        # REFERENCES.md worked example: 1 nA, 1 s, 1 µm² = 62.4 e⁻/Å² (62.4150907446076)
        assert "Dose 62.4 e⁻/Å² rate 62.4 e⁻/Å²/s (computed from the step's parameters)" in shown


def test_a_post_without_its_form_token_is_refused(connection: Any, bench: Bench) -> None:
    guarded = create_app({"DB_BIND": connection, "TESTING": True, "SECRET_KEY": "t"})
    response = guarded.test_client().post(f"{URL}/record", data=sharpening(bench))
    assert response.status_code == 400


@pytest.mark.parametrize("value, shown", [
    (None, "—"), (0.0, "0"), (0.00196, "0.00196"), (62.4150907446076, "62.4"),
    (14406.0, "14 406"), (8.4271e18, "8.43 × 10¹⁸"), (4.16e-4, "4.16 × 10⁻⁴"),
])
def test_doses_are_written_as_people_read_them(value: float | None, shown: str) -> None:
    assert sci(value) == shown


def test_page_cost_does_not_grow_with_the_session(client: FlaskClient, connection: Any,
                                                  bench: Bench, make_item: Any,
                                                  session: Session) -> None:
    many = [make_item(kind="needle").code for _ in range(30)]
    session.commit()
    one, _ = _cost(client, connection, f"{URL}?item={many[0]}&technique=sem-imaging")
    lots, html = _cost(client, connection,
                       f"{URL}?technique=sem-imaging&" + "&".join(f"item={c}" for c in many))
    assert lots == one and "on 30 items" in html
