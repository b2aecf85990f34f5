"""Allocation writes: every refusal names its field and value; transfers, returns, DOIs."""

from __future__ import annotations

import json
import re
from datetime import datetime
from pathlib import Path

import datacite
import pytest

from curation.errors import InvalidInput
from curation.services import allocations, events, items
from tests.conftest import hours


@pytest.fixture
def loan(session, operator):
    a = allocations.open_allocation(session, actor=operator, reference="SV-1", facility="F",
                                    investigator=operator, starts_at=hours(0),
                                    expires_at=hours(100))
    particle = items.register_item(session, actor=operator, code="SV-P", kind="particle",
                                   created_at=hours(0), mass_ug=1.0)
    allocations.issue_item(session, actor=operator, allocation=a, item=particle,
                           issued_at=hours(1), allocated_mass_ug=1.0)
    return a, particle


def test_open_refuses_naming_the_field(session, operator) -> None:
    with pytest.raises(InvalidInput) as err:
        allocations.open_allocation(session, actor=operator, reference=" ", facility="F",
                                    investigator=operator, starts_at=hours(0))
    assert err.value.field == "reference"
    with pytest.raises(InvalidInput) as err:
        allocations.open_allocation(session, actor=operator, reference="X", facility="F",
                                    investigator=operator, starts_at=hours(5),
                                    expires_at=hours(1))
    assert err.value.field == "expires_at"
    with pytest.raises(InvalidInput) as err:
        allocations.open_allocation(session, actor=operator, reference="X", facility="F",
                                    investigator=operator, starts_at=datetime(2026, 1, 1))
    assert err.value.field == "starts_at"


def test_duplicate_reference_and_member(session, operator, loan) -> None:
    a, _ = loan
    with pytest.raises(InvalidInput, match="SV-1") as err:
        allocations.open_allocation(session, actor=operator, reference="SV-1", facility="F",
                                    investigator=operator, starts_at=hours(0))
    assert err.value.field == "reference"
    with pytest.raises(InvalidInput) as err:
        allocations.add_member(session, actor=operator, allocation=a, person=operator,
                               role="boss")
    assert err.value.field == "role" and err.value.value == "boss"
    allocations.add_member(session, actor=operator, allocation=a, person=operator)
    with pytest.raises(InvalidInput) as err:
        allocations.add_member(session, actor=operator, allocation=a, person=operator)
    assert err.value.field == "person"


def test_periods_and_submission(session, operator, loan) -> None:
    a, _ = loan
    with pytest.raises(InvalidInput) as err:
        allocations.add_reporting_period(session, actor=operator, allocation=a,
                                         period_start=hours(10), period_end=hours(5),
                                         due_at=hours(20))
    assert err.value.field == "period_end"
    period = allocations.add_reporting_period(session, actor=operator, allocation=a,
                                              period_start=hours(0), period_end=hours(5),
                                              due_at=hours(20))
    allocations.submit_report(session, actor=operator, report=period, submitted_at=hours(6))
    with pytest.raises(InvalidInput) as err:
        allocations.submit_report(session, actor=operator, report=period, submitted_at=hours(7))
    assert err.value.field == "report"


def test_return_needs_an_item_of_the_loan_and_a_sending_event(session, operator, loan,
                                                              make_item) -> None:
    a, particle = loan
    other = make_item()
    with pytest.raises(InvalidInput) as err:
        allocations.record_return(session, actor=operator, allocation=a, item=other,
                                  returned_at=hours(5))
    assert err.value.field == "item" and err.value.value == other.code
    store = events.record_event(session, actor=operator, kind="custody", item=particle,
                                occurred_at=hours(5), action="store")
    with pytest.raises(InvalidInput) as err:
        allocations.record_return(session, actor=operator, allocation=a, item=particle,
                                  returned_at=hours(5), event=store)
    assert err.value.field == "event"
    sent = events.record_event(session, actor=operator, kind="custody", item=particle,
                               occurred_at=hours(6), action="shipped")
    row = allocations.record_return(session, actor=operator, allocation=a, item=particle,
                                    returned_at=hours(6), event=sent, mass_ug=0.9)
    assert row.event_id == sent.id


def test_transfer_opens_a_sub_allocation(session, operator, loan, make_item) -> None:
    a, particle = loan
    sub = allocations.transfer(session, actor=operator, allocation=a, reference="SV-1-T",
                               laboratory="Lab two", investigator=operator, items=[particle],
                               issued_at=hours(2))
    assert sub.parent_id == a.id and sub.facility == a.facility and sub.expires_at == a.expires_at
    with pytest.raises(InvalidInput) as err:
        allocations.transfer(session, actor=operator, allocation=a, reference="SV-1-U",
                             laboratory="Lab two", investigator=operator, items=[make_item()],
                             issued_at=hours(2))
    assert err.value.field == "item"


def _schema_doi_pattern() -> re.Pattern[str]:
    # DataCite's own rule: properties.doi of the 4.5 JSON schema in the datacite package
    schema = Path(datacite.__file__).parent / "schemas" / "datacite-v4.5.json"
    return re.compile(json.loads(schema.read_text())["properties"]["doi"]["pattern"])


@pytest.mark.parametrize("doi", ["10.1234/abc-5", "10.123456789/a.b;c(d)", "10.5555/x",
                                 "10.123/abc", "11.1234/abc", "10.1234/", "10.1234/a b",
                                 "10.12345678901/x", "doi 10.1234/x"])
def test_doi_check_agrees_with_the_datacite_schema(doi: str) -> None:
    expected = bool(_schema_doi_pattern().match(doi))
    try:
        allocations.check_doi(doi)
        accepted = True
    except InvalidInput as err:
        assert err.field == "doi" and err.value == doi
        accepted = False
    assert accepted == expected


def test_output_strips_a_resolver_and_refuses_duplicates(session, operator, loan) -> None:
    a, _ = loan
    out = allocations.add_output(session, actor=operator, allocation=a, kind="dataset",
                                 doi="https://doi.org/10.5555/abc", title="Data", year=2026)
    assert out.doi == "10.5555/abc"
    with pytest.raises(InvalidInput) as err:
        allocations.add_output(session, actor=operator, allocation=a, kind="dataset",
                               doi="10.5555/abc", title="Again")
    assert err.value.field == "doi"
    with pytest.raises(InvalidInput) as err:
        allocations.add_output(session, actor=operator, allocation=a, kind="poster",
                               doi="10.5555/abd", title="T")
    assert err.value.field == "kind"
