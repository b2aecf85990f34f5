"""The findings list, one finding's dispositions, and findings on the item page."""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any

import pytest
from flask.testing import FlaskClient
from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import ledger
from curation.audit import engine
from curation.model import Disposition, Event, Item, Person
from curation.services import custody, events, studies
from tests.conftest import hours
from tests.web.test_custody import error_of, post
from tests.web.test_items import entry, page


@dataclass
class Case:
    """A pristine particle exposed to air, and a second particle with a seal never applied."""

    pristine: Item
    other: Item
    air: Event
    seal: Event
    curator: Person


@pytest.fixture
def case(session: Session, operator: Person, make_item: Any) -> Case:
    pristine = make_item(code="FD-P", is_pristine=True)
    other = make_item(code="FD-Q")
    for item in (pristine, other):
        custody.receive(session, actor=operator, item=item, giver=None, at=hours(0))
    air = custody.handle(session, actor=operator, item=pristine, environment="air",
                         start=hours(1), end=hours(1.5))
    seal = custody.seal(session, actor=operator, item=other, action="seal-checked",
                        seal_id="S-404", at=hours(2))
    study = studies.create_study(session, actor=operator, code="STUDY-A", title="Rim water")
    studies.enrol(session, actor=operator, study=study, item=pristine)
    session.commit()
    return Case(pristine, other, air, seal, operator)


def rows(html: str) -> list[tuple[str, str]]:
    """(code, item code) of each row of the findings table."""
    return re.findall(r'class="code finding-link" href="[^"]+">([^<]+)</a></td>\s*'
                      r'<td><a class="code" href="/items/([^"]+)"', html)


def key_of(session: Session, item: Item, code: str) -> str:
    return next(f.key for f in engine.audit_item(session, item) if f.code == code)


def test_the_list_shows_every_finding_with_severity_in_words_and_shapes(
        client: FlaskClient, case: Case) -> None:
    html = page(client, "/findings")
    assert ("pristine-broken", "FD-P") in rows(html) and ("seal-mismatch", "FD-Q") in rows(html)
    row = html[html.index('data-key="pristine-broken:'):]
    row = row[:row.index("</tr>")]
    assert re.search(r'class="severity severity-error"><span[^>]*>✖</span> error', row)
    assert f'href="/events/{case.air.id}"' in row and "open — no disposition" in row
    assert "FD-P is kept pristine but was exposed to air" in row


@pytest.mark.parametrize(("query", "expected"), [
    ("code=pristine-broken", {("pristine-broken", "FD-P")}),
    ("severity=warning", set()),
    ("item=FD-Q", {("seal-mismatch", "FD-Q")}),
    ("study=STUDY-A", {("pristine-broken", "FD-P")}),
    ("item=FD-Q&code=pristine-broken", set()),
])
def test_filters(query: str, expected: set[tuple[str, str]], client: FlaskClient,
                 case: Case) -> None:
    found = {r for r in rows(page(client, f"/findings?{query}")) if r[1].startswith("FD-")}
    assert found == expected


def test_an_unknown_code_filter_is_refused_naming_the_field(client: FlaskClient) -> None:
    html = page(client, "/findings?code=teapot", status=400)
    assert "Code" in error_of(html, "code") and "Not a valid choice" in error_of(html, "code")


def test_disposition_round_trip_latest_wins_earlier_listed(
        client: FlaskClient, case: Case, session: Session) -> None:
    key = key_of(session, case.pristine, "pristine-broken")
    html = page(client, f"/findings/{key}")
    assert "FD-P is kept pristine" in html and f"/events/{case.air.id}" in html
    post(client, f"/findings/{key}", {"dispose-operator": case.curator.username,
                                      "dispose-decision": "accepted",
                                      "dispose-reason": "opened in air on purpose for a test cut"})
    html = page(client, f"/findings/{key}")
    assert "Disposition recorded: accepted" in html
    assert "opened in air on purpose for a test cut" in html
    assert ("pristine-broken", "FD-P") in rows(page(client, "/findings?state=disposed"))
    assert ("pristine-broken", "FD-P") not in rows(page(client, "/findings?state=open"))
    assert ("seal-mismatch", "FD-Q") in rows(page(client, "/findings?state=open"))
    post(client, f"/findings/{key}", {"dispose-operator": case.curator.username,
                                      "dispose-decision": "accepted",
                                      "dispose-reason": "second look: grain was a spare"})
    html = page(client, "/findings?item=FD-P")
    row = html[html.index(f'data-key="{key}"'):]
    row = row[:row.index("</tr>")]
    latest = row[row.index('class="disposition"'):row.index("earlier disposition")]
    assert "second look" in latest and "1 earlier disposition" in row
    assert "opened in air on purpose" in row[row.index("earlier disposition"):]
    assert len(session.scalars(select(Disposition).where(
        Disposition.finding_key == key)).all()) == 2
    assert ledger.verify(session).ok


def test_a_fix_needs_its_correction_and_stays_visible_once_the_cause_is_gone(
        client: FlaskClient, case: Case, session: Session) -> None:
    key = key_of(session, case.pristine, "pristine-broken")
    base = {"dispose-operator": case.curator.username, "dispose-decision": "fixed",
            "dispose-reason": "the exposure was logged as air by mistake"}
    html = post(client, f"/findings/{key}", base, status=400)
    assert "a correction event (one that supersedes another)" in error_of(html, "dispose-correction_id")
    html = post(client, f"/findings/{key}", {**base, "dispose-correction_id": "99999999"},
                status=400)
    assert "99999999" in error_of(html, "dispose-correction_id")
    fix = events.correct_event(session, actor=case.curator, original=case.air,
                               reason="it was the glovebox", environment="n2-glovebox")
    session.commit()
    # The correction is what removes the finding; its page still takes the fix.
    assert "does not raise this finding now" in page(client, f"/findings/{key}")
    post(client, f"/findings/{key}", {**base, "dispose-correction_id": str(fix.id)})
    html = page(client, f"/findings/{key}")
    assert "Disposition recorded: fixed" in html and f"/events/{fix.id}" in html
    listed = page(client, "/findings?item=FD-P")
    assert ("pristine-broken", "FD-P") in rows(listed) and "no longer raised" in listed
    assert ("pristine-broken", "FD-P") not in rows(page(client, "/findings?state=open"))
    assert ledger.verify(session).ok


def test_an_unknown_finding_is_a_404(client: FlaskClient, case: Case) -> None:
    page(client, "/findings/pristine-broken:99999999:1", status=404)
    page(client, f"/findings/teapot:{case.other.id}:1", status=404)
    page(client, "/findings/nonsense", status=404)


def test_item_page_shows_findings_beside_their_evidence(
        client: FlaskClient, case: Case, session: Session) -> None:
    key = key_of(session, case.pristine, "pristine-broken")
    post(client, f"/findings/{key}", {"dispose-operator": case.curator.username,
                                      "dispose-decision": "accepted",
                                      "dispose-reason": "known exposure"})
    html = page(client, "/items/FD-P")
    section = html[html.index('id="findings-h"'):html.index('id="timeline-h"')]
    assert "pristine-broken" in section and "✖</span> error" in section
    assert "known exposure" in section and f'href="#event-{case.air.id}"' in section
    number = re.search(r'<li id="finding-(\d+)"[^>]*>\s*<p>.*?pristine-broken', section,
                       re.DOTALL)
    assert number is not None
    marked = entry(html, case.air.id)
    assert f'<a href="#finding-{number.group(1)}"><span aria-hidden="true">⚠</span> ' \
           "evidence for pristine-broken</a>" in marked
    receipt = session.scalar(select(Event.id).where(Event.item_id == case.pristine.id,
                                                     Event.action == "receipt"))
    assert receipt is not None and "evidence for" not in entry(html, receipt)
