"""DataCite 4.5 records for physical samples, checked with the `datacite` package's validator."""

from __future__ import annotations

import copy

import pytest
from datacite import schema45

from curation.reports import datacite
from curation.services import items
from curation.services.common import item_by_code


def test_records_validate_and_link_parent_and_children(session, operator, make_family) -> None:
    make_family("DC-A", 2)
    particle = datacite.record(session, "DC-A")
    needle = datacite.record(session, "DC-A-N0")
    for rec in (particle, needle):
        assert schema45.validate(rec) is True
        assert datacite.format_problems(rec) == []
        assert rec["types"]["resourceTypeGeneral"] == "PhysicalObject"
    assert {(r["relationType"], r["relatedIdentifier"]) for r in particle["relatedIdentifiers"]} \
        == {("IsSourceOf", f"urn:curation:item-DC-A-L{n}") for n in range(2)}
    assert [r["relationType"] for r in needle["relatedIdentifiers"]] == ["IsDerivedFrom"]


def test_consumed_sample_states_its_status(session, operator, make_family) -> None:
    make_family("DC-B", 1)
    items.set_status(session, actor=operator, item=item_by_code(session, "DC-B-N0"),
                     status="consumed")
    rec = datacite.record(session, "DC-B-N0")
    text = " ".join(d["description"] for d in rec["descriptions"])
    assert "consumed in analysis" in text and "apt" in text


@pytest.mark.parametrize("missing", ["creators", "titles", "publisher", "publicationYear",
                                     "types"])
def test_missing_mandatory_property_fails(session, make_family, missing: str) -> None:
    make_family(f"DC-{missing}", 1)
    rec = copy.deepcopy(datacite.record(session, f"DC-{missing}"))
    del rec[missing]
    assert schema45.validate(rec) is False


def test_our_format_checks(session, make_family) -> None:
    make_family("DC-F", 1)
    rec = datacite.record(session, "DC-F")
    rec["publicationYear"] = "25"
    rec["dates"][0]["date"] = "07/10/2025"
    problems = datacite.format_problems(rec)
    assert "publicationYear must be four digits" in problems and len(problems) == 2
