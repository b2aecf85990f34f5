"""The engine: every code declared, study filters, dispositions kept beside findings."""

from __future__ import annotations

import pytest

from curation import ledger
from curation.audit import engine
from curation.errors import InvalidInput
from curation.services import custody, events, findings, studies
from tests.conftest import hours


def _air(session, people, item, at):
    return custody.handle(session, actor=people["alba"], item=item, environment="air",
                          start=hours(at), end=hours(at + 0.5))


def test_audit_by_item_and_by_study(session, people, make_held) -> None:
    kept, other = make_held(is_pristine=True), make_held(is_pristine=True)
    _air(session, people, kept, 1)
    _air(session, people, other, 1)
    study = studies.create_study(session, actor="test", code="S-PRIS", title="pristine")
    studies.enrol(session, actor="test", study=study, item=kept)
    now = hours(10)
    by_item = list(engine.audit(session, item_codes=[other.code], now=now))
    by_study = list(engine.audit(session, study="S-PRIS", now=now))
    assert [f.item_code for f in by_item] == [other.code]
    assert [f.item_code for f in by_study] == [kept.code]
    assert {f.code for f in by_item + by_study} <= set(engine.CODES)


def test_disposition_stays_beside_its_finding(session, people, make_held) -> None:
    kept = make_held(is_pristine=True)
    exposure = _air(session, people, kept, 1)
    [finding] = engine.audit_item(session, kept, now=hours(5))
    assert engine.dispositions(session, [finding]) == {}
    findings.dispose(session, actor=people["chen"], finding_key=finding.key, code=finding.code,
                     item=kept, decision="accepted", reason="opened for a planned air test")
    later = findings.dispose(session, actor=people["chen"], finding_key=finding.key,
                             code=finding.code, item=kept, decision="fixed",
                             reason="exposure was logged on the wrong grain",
                             correction=events.correct_event(
                                 session, actor=people["chen"], original=exposure,
                                 reason="wrong grain", note="belongs to another grain"))
    assert engine.dispositions(session, [finding])[finding.key] == later
    assert ledger.verify(session).ok


def test_disposition_refusals_name_the_field(session, people, make_held) -> None:
    kept = make_held(is_pristine=True)
    _air(session, people, kept, 1)
    [finding] = engine.audit_item(session, kept, now=hours(5))
    with pytest.raises(InvalidInput, match="reason"):
        findings.dispose(session, actor=people["chen"], finding_key=finding.key,
                         code=finding.code, item=kept, decision="accepted", reason="  ")
    with pytest.raises(InvalidInput, match="correction"):
        findings.dispose(session, actor=people["chen"], finding_key=finding.key,
                         code=finding.code, item=kept, decision="fixed", reason="x")
    with pytest.raises(InvalidInput, match="decision"):
        findings.dispose(session, actor=people["chen"], finding_key=finding.key,
                         code=finding.code, item=kept, decision="ignored", reason="x")


def test_fixed_needs_a_real_correction(session, people, make_held) -> None:
    kept = make_held(is_pristine=True)
    exposure = _air(session, people, kept, 1)
    [finding] = engine.audit_item(session, kept, now=hours(5))
    with pytest.raises(InvalidInput, match="correction"):
        findings.dispose(session, actor=people["chen"], finding_key=finding.key,
                         code=finding.code, item=kept, decision="fixed", reason="x",
                         correction=exposure)
