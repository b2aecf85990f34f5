"""Events and corrections: a correction never overwrites, both stay visible."""

from __future__ import annotations

import pytest

from curation import history, ledger
from curation.errors import InvalidInput, RuleViolation
from curation.services import events
from tests.conftest import hours


def test_correction_supersedes_and_keeps_the_original(session, operator, make_item, make_event) -> None:
    item = make_item()
    original = make_event(item, 1, details={"beam_current_nA": 50.0})
    fixed = events.correct_event(session, actor=operator, original=original,
                                 reason="current mistyped", details={"beam_current_nA": 0.05})
    assert fixed.supersedes_id == original.id
    assert original.details == {"beam_current_nA": 50.0}
    assert events.superseded_by(session, original) is fixed
    timeline = [h.event.id for h in history.effective_history(session, item.id)]
    assert timeline == [original.id, fixed.id]
    assert ledger.verify(session).ok


def test_a_superseded_event_cannot_be_corrected_again(session, operator, make_item, make_event) -> None:
    original = make_event(make_item(), 1)
    fixed = events.correct_event(session, actor=operator, original=original, reason="typo",
                                 summary="x")
    with pytest.raises(RuleViolation, match=f"corrected by event {fixed.id}"):
        events.correct_event(session, actor=operator, original=original, reason="again")


def test_correction_needs_a_reason_and_known_fields(session, operator, make_item, make_event) -> None:
    original = make_event(make_item(), 1)
    with pytest.raises(InvalidInput, match="reason"):
        events.correct_event(session, actor=operator, original=original, reason=" ")
    with pytest.raises(InvalidInput, match="changes"):
        events.correct_event(session, actor=operator, original=original, reason="r", item=None)


def test_end_before_start_is_refused(make_item, make_event) -> None:
    with pytest.raises(InvalidInput, match="ended_at"):
        make_event(make_item(), 5, kind="handling", environment="air", ended_at=hours(4))


def test_a_correction_keeps_the_dose_unless_it_corrects_it(session, operator, make_item) -> None:
    item = make_item()
    step = events.record_event(session, actor=operator, kind="step", item=item,
                               occurred_at=hours(1), technique="tem-imaging",
                               dose={"electron_dose_e_per_A2": 62.4, "is_dose_reported": True})
    fixed = events.correct_event(session, actor=operator, original=step, reason="summary",
                                 summary="bright field")
    assert fixed.electron_dose_e_per_A2 == 62.4 and fixed.is_dose_reported
    again = events.correct_event(session, actor=operator, original=fixed, reason="dose",
                                 electron_dose_e_per_A2=31.2)
    assert again.electron_dose_e_per_A2 == 31.2
    with pytest.raises(InvalidInput, match="dose"):
        events.record_event(session, actor=operator, kind="step", item=item,
                            occurred_at=hours(2), dose={"dose_gray": 1})
