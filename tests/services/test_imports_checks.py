"""Bulk import: parameters seen before are checked once, and never mistaken for others.

The reference for each row's cleaned parameters is `techniques.validate` run on that row
alone, as the station page runs it.
"""

from __future__ import annotations

import json
import math

import pytest
from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import ledger, techniques
from curation.model import Event
from curation.services import imports

TKD = {"accelerating_voltage_kV": 25, "beam_current_nA": 5, "sample_tilt_deg": 10}


def _rows(item: str, *details: dict, technique: str = "tkd") -> list[tuple[int, dict]]:
    lines = [json.dumps({"item": item, "kind": "step", "technique": technique, "details": d,
                         "occurred_at": f"2026-03-02T10:{k:02d}:00Z"})
             for k, d in enumerate(details)]
    return list(imports.read_rows("\n".join(lines), "jsonl"))


def _stored(session: Session, item_id: int) -> list[dict]:
    return list(session.scalars(select(Event.details).where(Event.item_id == item_id)
                                .order_by(Event.id)))


def test_repeated_parameters_give_what_each_row_gives_alone(session, operator, make_item):
    item = make_item()
    # -0.0 and 0.0 are equal, 1 and 1.0 too; the checks keep what was written apart
    written = [TKD, TKD, {**TKD, "sample_tilt_deg": -0.0}, {**TKD, "sample_tilt_deg": 0.0},
               {**TKD, "frame_count": 1}, {**TKD, "frame_count": 1.0}, {**TKD, "frame_count": 2},
               TKD, {**TKD, "beam_current_nA": "500 pA"}, {**TKD, "beam_current_nA": "0.5 nA"}]
    imports.import_events(session, actor=operator, rows=_rows(item.code, *written))
    stored = _stored(session, item.id)
    assert stored == [dict(techniques.validate("tkd", d).values) for d in written]
    signs = [math.copysign(1, s["sample_tilt_deg"]) for s in stored[2:4]]
    assert signs == [-1, 1]
    assert ledger.verify(session).ok


def test_a_bad_row_among_repeated_good_ones_is_named(session, operator, make_item):
    item = make_item()
    # True is not a frame count, though True == 1; "90 kV" is beyond the instrument class
    rows = _rows(item.code, {**TKD, "frame_count": 1}, {**TKD, "frame_count": True},
                 {**TKD, "frame_count": 1}, {**TKD, "accelerating_voltage_kV": "90 kV"},
                 {**TKD, "accelerating_voltage_kV": "90 kV"}, {**TKD, "unknown_field": 1})
    with pytest.raises(imports.ImportRejected) as caught:
        imports.import_events(session, actor=operator, rows=rows)
    lines = dict(caught.value.problems)
    assert sorted(lines) == [2, 4, 5, 6]  # JSON lines count from 1
    assert "frame_count" in lines[2] and "unknown_field" in lines[6]
    assert "accelerating_voltage_kV" in lines[4] and lines[4] == lines[5]
    assert _stored(session, item.id) == []


def test_values_out_of_the_typical_range_need_confirming_on_every_row(session, operator,
                                                                       make_item):
    item = make_item()
    unusual = {**TKD, "accelerating_voltage_kV": 40}  # typical 20-30 kV, allowed up to 50
    with pytest.raises(imports.ImportRejected) as caught:
        imports.import_events(session, actor=operator, rows=_rows(item.code, unusual, unusual))
    assert [n for n, _ in caught.value.problems] == [1, 2]
    assert all("typical" in message for _, message in caught.value.problems)
    done = imports.import_events(session, actor=operator, confirm_warnings=True,
                                 rows=_rows(item.code, unusual, unusual))
    assert done.events == 2
    assert _stored(session, item.id) == [dict(techniques.validate("tkd", unusual).values)] * 2
