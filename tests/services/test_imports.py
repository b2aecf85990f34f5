"""Bulk event import: every row checked as the services check it, all written or none."""

from __future__ import annotations

import json

import pytest
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from curation import ledger
from curation.model import Event, LedgerEntry
from curation.services import imports

SEM = {"accelerating_voltage_kV": "5 kV", "beam_current_nA": "500 pA",
       "detector": "secondary_electron"}


def _jsonl(*rows: dict) -> list[tuple[int, dict]]:
    return list(imports.read_rows("\n".join(json.dumps(r) for r in rows), "jsonl"))


def _events(session: Session) -> int:
    return session.scalar(select(func.count()).select_from(Event)) or 0


def test_good_rows_are_written_with_clean_values_dose_and_ledger(session, operator, make_item):
    item = make_item()
    before = session.scalar(select(func.count()).select_from(LedgerEntry))
    rows = _jsonl(
        {"item": item.code, "kind": "step", "occurred_at": "2026-03-02T10:00:00+01:00",
         "ended_at": "2026-03-02T10:10:00+01:00", "technique": "sem-imaging", "details": SEM},
        {"item": item.code, "kind": "custody", "occurred_at": "2026-03-02T11:00:00Z",
         "action": "store", "operator": operator.username},
        {"item": item.code, "kind": "handling", "occurred_at": "2026-03-02T12:00:00Z",
         "environment": "n2-glovebox"})
    done = imports.import_events(session, actor=operator, rows=rows)
    assert done.events == 3 and done.by_kind == {"step": 1, "custody": 1, "handling": 1}
    step = session.scalars(select(Event).where(Event.item_id == item.id, Event.kind == "step")).one()
    # 500 pA = 0.5 nA (SI prefixes); the offset is kept as the same instant in UTC
    assert step.details["beam_current_nA"] == 0.5 and step.occurred_at.hour == 9
    assert step.actor_id == operator.id and step.is_destructive is False
    assert session.scalar(select(func.count()).select_from(LedgerEntry)) == before + 3
    assert ledger.verify(session).ok


def test_every_bad_row_is_named_and_nothing_is_written(session, operator, make_item):
    item = make_item()
    before = _events(session)
    rows = _jsonl(
        {"item": item.code, "kind": "custody", "occurred_at": "2026-03-02T10:00:00Z",
         "action": "store"},
        {"item": item.code, "kind": "step", "occurred_at": "2026-03-02T10:00:00",
         "technique": "sem-imaging", "details": SEM},
        {"item": "NO-SUCH", "kind": "handling", "occurred_at": "2026-03-02T10:00:00Z",
         "environment": "air"},
        {"item": item.code, "kind": "handling", "occurred_at": "2026-03-02T10:00:00Z",
         "environment": "seawater"},
        {"item": item.code, "kind": "step", "occurred_at": "2026-03-02T10:00:00Z",
         "technique": "sem-imaging", "details": {**SEM, "accelerating_voltage_kV": "90 kV"}})
    with pytest.raises(imports.ImportRejected) as caught:
        imports.import_events(session, actor=operator, rows=rows)
    lines = dict(caught.value.problems)
    assert sorted(lines) == [2, 3, 4, 5]
    assert "timezone" in lines[2] and "NO-SUCH" in lines[3] and "seawater" in lines[4]
    assert "accelerating_voltage_kV" in lines[5]
    assert _events(session) == before


def test_csv_rows_carry_their_line_numbers() -> None:
    text = 'item,kind,occurred_at,details\nA,step,2026-03-02T10:00:00Z,"{""x"": 1}"\nB,custody,x,\n'
    rows = list(imports.read_rows(text, "csv"))
    assert [n for n, _ in rows] == [2, 3] and rows[0][1]["details"] == '{"x": 1}'
    assert list(imports.read_rows('{"a": 1}\n\nnot json\n', "jsonl"))[1][0] == 3
