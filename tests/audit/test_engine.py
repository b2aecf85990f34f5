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


def test_batched_audit_equals_item_by_item_on_the_demo(demo_url) -> None:
    """Auditing in batches of any size gives exactly the findings of one item at a time
    (the batch only shares look-ups; each item's context must stay its own)."""
    from sqlalchemy import select

    from curation.db import make_engine, make_sessionmaker
    from curation.model import Item

    demo = make_engine(demo_url)
    try:
        with make_sessionmaker(demo)() as session:
            now = hours(10**5)
            alone = [f for item in session.scalars(select(Item).order_by(Item.id))
                     for f in engine.audit_item(session, item, now=now)]
            for batch in (1, 7, 1000):
                told: list[int] = []
                assert list(engine.audit(session, now=now, batch=batch,
                                         progress=told.append)) == alone
                items = len(session.scalars(select(Item.id)).all())
                assert told == [min(n, items) for n in range(batch, items + batch, batch)]
            assert {f.code for f in alone} >= {"pristine-broken", "control-failed"}
    finally:
        demo.dispose()


def test_statements_per_batch_do_not_grow_with_the_batch(demo_url) -> None:
    """Two items or every item of the demo: the same statements (no query per item; one
    item alone joins the people and places into the history's statement instead)."""
    from sqlalchemy import event, select

    from curation.db import make_engine, make_sessionmaker
    from curation.model import Item

    demo = make_engine(demo_url)
    seen: list[str] = []

    def record(_conn, _cursor, statement, *_args) -> None:
        seen.append(statement)

    try:
        with make_sessionmaker(demo)() as session:
            every = list(session.scalars(select(Item).order_by(Item.id)))
            counts = []
            event.listen(demo, "before_cursor_execute", record)
            for chosen in (every[:2], every):
                seen.clear()
                engine.audit_items(session, chosen, now=hours(10**5))
                counts.append(len(seen))
            event.remove(demo, "before_cursor_execute", record)
            assert len(every) > 40 and counts[0] == counts[1], (counts, seen)
    finally:
        demo.dispose()
