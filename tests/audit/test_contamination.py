"""Control readings against baselines, and tracing on a hand-built co-exposure graph."""

from __future__ import annotations

import math

import pytest

from curation.audit import contamination
from curation.errors import ImportRejected, InvalidInput
from curation.services import controls, custody, events, items, stations, studies
from tests.conftest import hours


@pytest.fixture
def study(session):
    return studies.create_study(session, actor="test", code="S-CTL", title="controls")


def _indicator(session, study, kind="k-sigma", threshold=3.0):
    return controls.define_indicator(
        session, actor="test", study=study, code=f"h2o-{kind}", name="surface H2O signal",
        unit="counts", baseline_value=10.0, baseline_uncertainty=3.0, threshold_kind=kind,
        threshold_value=threshold, baseline_source="blank series 1")


def test_z_score_uses_the_combined_standard_uncertainty(session, study) -> None:
    ind = _indicator(session, study)
    # JCGM 100:2008 (GUM) 5.1.2: uncorrelated inputs combine in quadrature: u_c = sqrt(3²+4²) = 5.
    verdict = contamination.evaluate(ind, 30.0, 4.0)
    assert verdict.z == pytest.approx(4.0) and not verdict.passed
    assert verdict.limit == pytest.approx(10.0 + 3.0 * 5.0)
    assert contamination.evaluate(ind, 24.0, 4.0).passed  # z = 2.8 <= 3


def test_absolute_threshold(session, study) -> None:
    ind = _indicator(session, study, kind="absolute", threshold=25.0)
    assert contamination.evaluate(ind, 25.0, 0.0).passed
    assert not contamination.evaluate(ind, 25.5, 0.0).passed
    assert math.isinf(contamination.evaluate(
        controls.define_indicator(session, actor="test", study=study, code="exact", name="x",
                                  unit="u", baseline_value=1, baseline_uncertainty=0,
                                  threshold_kind="k-sigma", threshold_value=2), 2, 0).z)


def test_indicator_refusals_name_the_field(session, study) -> None:
    with pytest.raises(InvalidInput, match="threshold_kind"):
        _indicator(session, study, kind="ratio")
    with pytest.raises(InvalidInput, match="threshold_value"):
        _indicator(session, study, threshold=0)


def test_control_reading_csv_is_all_or_nothing(session, operator, study, make_item) -> None:
    _indicator(session, study)
    make_item(code="BLK-1", kind="procedural-blank")
    make_item(code="GRAIN-1")
    text = ("control,indicator,measured_at,value,uncertainty\n"
            "BLK-1,h2o-k-sigma,2026-03-02T09:00:00+00:00,11,2\n"
            "GRAIN-1,h2o-k-sigma,2026-03-02T09:00:00+00:00,11,2\n"
            "BLK-1,nitrogen,2026-03-02T09:00:00+00:00,11,2\n"
            "BLK-1,h2o-k-sigma,2026-03-02 09:00,11,2\n"
            "BLK-1,h2o-k-sigma,2026-03-02T09:00:00+00:00,eleven,2\n"
            "BLK-1,h2o-k-sigma,2026-03-02T09:00:00+00:00,11,-2\n")
    with pytest.raises(ImportRejected) as caught:
        controls.import_control_readings_csv(session, actor=operator, study=study, text=text)
    lines = [p.split(":")[0] for p in caught.value.problems]
    assert lines == ["line 3", "line 4", "line 5", "line 6", "line 7"]
    assert "not a control item" in caught.value.problems[0]
    assert "not defined for this study" in caught.value.problems[1]
    good = controls.import_control_readings_csv(
        session, actor=operator, study=study, text="\n".join(text.splitlines()[:2]) + "\n")
    assert [e.details["value"] for e in good] == [11.0]


def test_tracing_on_a_hand_built_graph(session, operator, make_item) -> None:
    witness = make_item(code="WIT-1", kind="witness-coupon")
    capsule, grain_a, grain_b = make_item(kind="capsule"), make_item(), make_item()
    grain_c, lamella, stranger = make_item(), make_item(kind="lamella"), make_item()
    box = stations.add_location(session, actor=operator, code="GB-T", name="box", kind="glovebox")
    # The witness and grain A sit in the capsule together from hour 1 to 3.
    for thing in (witness, grain_a):
        items.place(session, actor=operator, item=thing, container=capsule, placed_at=hours(1),
                    removed_at=hours(3))
    # Grain A then shares the glovebox with grain B (hour 4), and B with C after the window.
    for thing, at in ((grain_a, 4), (grain_b, 4.5), (grain_c, 30), (stranger, 12)):
        custody.handle(session, actor=operator, item=thing, environment="n2-glovebox",
                       start=hours(at), end=hours(at + 1), location=box)
    # A lamella cut from grain A after the window opened inherits the risk.
    items.derive(session, actor=operator, parent=grain_a, child=lamella, derived_at=hours(6))
    events.record_event(session, actor=operator, kind="step", item=stranger,
                        occurred_at=hours(0), technique="xct")
    found = {r.item_id: r for r in contamination.trace(session, witness, (hours(0), hours(10)),
                                                       depth=2)}
    assert set(found) == {capsule.id, grain_a.id, grain_b.id, lamella.id}
    assert found[grain_a.id].depth == 1 and found[grain_a.id].path[0].kind == "same container"
    assert found[grain_b.id].depth == 2 and found[grain_b.id].path[-1].kind == "same place"
    assert found[lamella.id].path[-1].kind == "cut from"
    assert len(found[grain_b.id].path[-1].event_ids) == 2
    # Grain C and the stranger used the box when nobody else was in it: not at risk.
    later = {r.item_id for r in contamination.trace(session, witness, (hours(0), hours(40)),
                                                     depth=3)}
    assert grain_c.id not in later and stranger.id not in later
    custody.handle(session, actor=operator, item=grain_c, environment="n2-glovebox",
                   start=hours(5), end=hours(5.2), location=box)
    assert grain_c.id in {r.item_id for r in contamination.trace(
        session, witness, (hours(0), hours(10)), depth=2)}
