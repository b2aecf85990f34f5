"""Allocation pages: the dashboard's due states, the forms, the report downloads."""

from __future__ import annotations

from sqlalchemy import select

from curation.model import AllocationMember
from curation.services import accounts, allocations, items
from tests.conftest import hours


def _loan(session, operator):
    a = allocations.open_allocation(session, actor=operator, reference="WA-1", facility="F",
                                    investigator=operator, starts_at=hours(0))
    particle = items.register_item(session, actor=operator, code="WA-P", kind="particle",
                                   created_at=hours(0), mass_ug=1.0)
    allocations.issue_item(session, actor=operator, allocation=a, item=particle,
                           issued_at=hours(0), allocated_mass_ug=1.0)
    # a period long past its due date, never sent
    allocations.add_reporting_period(session, actor=operator, allocation=a,
                                     period_start=hours(0), period_end=hours(1), due_at=hours(2))
    session.flush()
    return a


def test_dashboard_says_overdue_in_words(client, session, operator) -> None:
    _loan(session, operator)
    page = client.get("/allocations").get_data(as_text=True)
    assert "WA-1" in page and "overdue" in page and "✖" in page


def test_bad_doi_is_refused_beside_its_field(client, session, operator) -> None:
    _loan(session, operator)
    answer = client.post("/allocations/WA-1/output", data={
        "output-operator": operator.username, "output-kind": "publication",
        "output-doi": "10.12/x", "output-title": "A paper"})
    assert answer.status_code == 400
    assert 'id="output-doi-error"' in answer.get_data(as_text=True)


def test_member_is_recorded(client, session, operator) -> None:
    a = _loan(session, operator)
    someone = accounts.add_person(session, actor="test", username="wa-an", name="An Analyst")
    session.flush()
    answer = client.post("/allocations/WA-1/member", data={
        "member-operator": operator.username, "member-person": someone.username,
        "member-role": "analyst"})
    assert answer.status_code == 302
    assert session.scalar(select(AllocationMember).where(
        AllocationMember.allocation_id == a.id)).person_id == someone.id


def test_report_formats(client, session, operator) -> None:
    _loan(session, operator)
    html = client.get("/allocations/WA-1/report").get_data(as_text=True)
    assert "report-overdue" in html and "<svg" in html
    assert client.get("/allocations/WA-1/report.pdf").data.startswith(b"%PDF-")
    assert client.get("/allocations/WA-1/report.csv").get_data(as_text=True).startswith("table,")
    assert client.get("/allocations/WA-1/report?period=x").status_code == 400
    assert client.get("/allocations/NOPE").status_code == 404
