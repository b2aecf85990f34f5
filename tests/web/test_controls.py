"""The auditor's pages on a hand-built study: readings, failures, items at risk, PDF."""

from __future__ import annotations

import io

import pytest
from sqlalchemy import select

from curation.model import Event
from curation.services import controls, custody, events, items, studies
from curation.services.common import item_by_code
from tests.conftest import hours


@pytest.fixture
def study(session, operator, make_item):
    """A witness and a grain in one capsule; the witness fails after the stay."""
    study = studies.create_study(session, actor="test", code="S-WEB", title="web controls")
    witness = make_item(code="W-WEB", kind="witness-coupon")
    grain, capsule = make_item(code="G-WEB"), make_item(code="C-WEB", kind="capsule")
    lonely = make_item(code="L-WEB")
    studies.enrol(session, actor="test", study=study, item=witness, role="control")
    for thing in (witness, grain):
        items.place(session, actor=operator, item=thing, container=capsule, placed_at=hours(1),
                    removed_at=hours(2))
    custody.handle(session, actor=operator, item=lonely, environment="air", start=hours(1),
                   end=hours(2))
    ind = controls.define_indicator(session, actor="test", study=study, code="dust",
                                    name="Dust <count>", unit="per mm²", baseline_value=1,
                                    baseline_uncertainty=0.5, threshold_kind="absolute",
                                    threshold_value=3)
    controls.record_control_reading(session, actor=operator, indicator=ind, control=witness,
                                    measured_at=hours(0), value=1.2, uncertainty=0.3)
    controls.record_control_reading(session, actor=operator, indicator=ind, control=witness,
                                    measured_at=hours(3), value=7.5, uncertainty=0.3)
    session.commit()
    return study


def test_controls_page_names_the_items_at_risk(client, study) -> None:
    html = client.get("/studies/S-WEB/controls").get_data(as_text=True)
    at_risk = html[html.index('class="report-table at-risk"'):]
    assert "G-WEB" in at_risk and "C-WEB" in at_risk and "L-WEB" not in at_risk
    assert "Dust &lt;count&gt;" in html  # escaped
    assert html.count('class="verdict pass"') == 1 and html.count('class="verdict fail"') == 1
    assert "<svg" in html


def test_depth_is_checked_and_named(client, study) -> None:
    response = client.get("/studies/S-WEB/controls?depth=9")
    assert response.status_code == 400
    assert "depth" in response.get_data(as_text=True) and "1 to 4" in response.get_data(as_text=True)


def test_pdf_and_unknown_study(client, study) -> None:
    pdf = client.get("/studies/S-WEB/controls.pdf")
    assert pdf.status_code == 200 and pdf.data.startswith(b"%PDF")
    assert "attachment" in pdf.headers["Content-Disposition"]
    assert client.get("/studies/NOPE/controls").status_code == 404
    assert "S-WEB" in client.get("/studies").get_data(as_text=True)


def test_record_a_reading_and_refuse_a_bad_file(client, study, operator) -> None:
    form = {"reading-operator": operator.username, "reading-control": "W-WEB",
            "reading-indicator": "dust", "reading-measured_at": "2026-03-02T12:00",
            "reading-measured_at-offset": "+00:00", "reading-value": "9.1",
            "reading-uncertainty": "0.2", "reading-source": "count"}
    done = client.post("/studies/S-WEB/controls/reading", data=form)
    assert done.status_code == 302
    html = client.get("/studies/S-WEB/controls").get_data(as_text=True)
    assert html.count('class="verdict fail"') == 2
    bad = {"import-operator": operator.username,
           "import-file": (io.BytesIO(b"control,indicator,measured_at,value,uncertainty\n"
                                      b"W-WEB,dust,2026-03-02 12:00,1,0.1\n"), "r.csv")}
    refused = client.post("/studies/S-WEB/controls/import", data=bad,
                          content_type="multipart/form-data")
    assert refused.status_code == 400
    assert "line 2: measured_at" in refused.get_data(as_text=True)
    after = client.get("/studies/S-WEB/controls").get_data(as_text=True)
    assert after.count('class="verdict') == html.count('class="verdict')


def test_a_reading_from_the_control_item_page_names_its_step(client, study, operator,
                                                            session) -> None:
    step = events.record_event(session, actor=operator, kind="step",
                               item=item_by_code(session, "W-WEB"), occurred_at=hours(4),
                               technique="sem-imaging")
    session.commit()
    item_page = client.get("/items/W-WEB").get_data(as_text=True)
    assert "/controls/W-WEB/reading" in item_page
    opened = client.get(f"/controls/W-WEB/reading?step={step.id}")
    assert opened.status_code == 302 and "control=W-WEB" in opened.headers["Location"]
    form = client.get(opened.headers["Location"]).get_data(as_text=True)
    assert f'value="{step.id}"' in form
    done = client.post("/studies/S-WEB/controls/reading", data={
        "reading-operator": operator.username, "reading-control": "W-WEB",
        "reading-indicator": "dust", "reading-measured_at": "2026-03-02T13:00",
        "reading-measured_at-offset": "+00:00", "reading-value": "1.1",
        "reading-uncertainty": "0.2", "reading-step": str(step.id)})
    assert done.status_code == 302
    reading = session.scalars(select(Event).where(Event.kind == "reading")
                              .order_by(Event.id.desc())).first()
    assert reading.details["step_id"] == step.id
    assert client.get("/controls/G-WEB/reading").status_code == 400
