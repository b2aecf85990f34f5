"""PROV export: read back by the `prov` library (W3C PROV-JSON), derivations as the database has them."""

from __future__ import annotations

from datetime import timedelta

import prov
import pytest
from prov.model import PROV, ProvDerivation

from curation import history
from curation.errors import InvalidInput
from curation.model import Item
from curation.reports import lineage
from curation.reports import prov as export


def test_round_trip(session, make_family) -> None:
    make_family("PV-A", 2)
    text = export.export(session, "PV-A")
    doc = prov.read(text, format="json")
    assert doc == export.document(lineage.build(session, "PV-A"))
    assert prov.read(doc.serialize(format="json"), format="json") == doc


def _derived_from(doc) -> dict[str, str]:
    return {str(r.formal_attributes[0][1]): str(r.formal_attributes[1][1])
            for r in doc.get_records(ProvDerivation)}


def test_walking_derivations_from_each_needle_matches_the_database(session,
                                                                   make_family) -> None:
    particle = make_family("PV-B", 3)
    doc = prov.read(export.export(session, "PV-B"), format="json")
    parent_of = _derived_from(doc)
    codes = {i.id: i.code for i in session.query(Item).filter(Item.code.like("PV-B%"))}
    for needle in [i for i, c in codes.items() if "-N" in c]:
        walked, node = [], f"cur:item-{codes[needle]}"
        while node in parent_of:
            node = parent_of[node]
            walked.append(node)
        expected = [f"cur:item-{codes[a]}" for a, _, _ in history.ancestors(session, needle)]
        assert walked == expected and walked[-1] == f"cur:item-{particle.code}"


def test_types_are_qualified_names_and_agents_present(session, make_family) -> None:
    make_family("PV-C", 1)
    doc = export.document(lineage.build(session, "PV-C"))
    types = {t for r in doc.get_records() for t in r.get_attribute("prov:type")}
    assert all(hasattr(t, "namespace") for t in types)
    assert PROV["Person"] in types


def test_an_activity_ending_before_it_starts_is_refused(session, make_family) -> None:
    particle = make_family("PV-D", 1)
    report = lineage.build(session, particle.code)
    step = report.steps[0].event
    step.ended_at = step.occurred_at - timedelta(minutes=5)  # in memory only
    with pytest.raises(InvalidInput):
        export.document(report)
