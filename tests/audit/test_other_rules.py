"""Time, lineage and environment rules: each with a case that trips it and one that must not."""

from __future__ import annotations

from datetime import timedelta

from sqlalchemy import update

from curation.model import Event
from curation.services import custody, events, items, studies
from tests.conftest import hours


def test_clock_skew_station_ahead(session, people, make_held, codes_for) -> None:
    grain = make_held()
    ev = events.record_event(session, actor=people["alba"], kind="step", item=grain,
                             occurred_at=hours(1), technique="xct")
    # The server wrote it 3 minutes "before" it happened: within the 5 min default.
    session.execute(update(Event).where(Event.id == ev.id)
                    .values(recorded_at=hours(1) - timedelta(minutes=3)))
    session.expire_all()
    assert codes_for(session, grain) == []
    session.execute(update(Event).where(Event.id == ev.id)
                    .values(recorded_at=hours(1) - timedelta(minutes=40)))
    session.expire_all()
    assert codes_for(session, grain) == ["clock-skew"]


def test_late_entry_only_when_the_study_asks(session, people, make_held, codes_for) -> None:
    grain = make_held()
    events.record_event(session, actor=people["alba"], kind="step", item=grain,
                        occurred_at=hours(1), technique="xct")
    assert codes_for(session, grain) == []  # written now, months after T0: no limit set
    study = studies.create_study(session, actor="test", code="S-LATE", title="t",
                                 rules={"late_entry_hours": 48})
    studies.enrol(session, actor="test", study=study, item=grain)
    # Both the receipt and the step were written long after they happened.
    assert codes_for(session, grain) == ["clock-skew", "clock-skew"]


def test_out_of_order(session, people, make_held, codes_for) -> None:
    grain = make_held(created_at=hours(10))
    events.record_event(session, actor=people["alba"], kind="step", item=grain,
                        occurred_at=hours(11), technique="sem-imaging")
    assert codes_for(session, grain) == []
    events.record_event(session, actor=people["alba"], kind="step", item=grain,
                        occurred_at=hours(9), technique="xct")
    assert codes_for(session, grain) == ["out-of-order"]


def test_event_after_consumption_is_out_of_order(session, people, make_held, codes_for) -> None:
    needle = make_held()
    events.record_event(session, actor=people["alba"], kind="step", item=needle,
                        occurred_at=hours(1), technique="apt", details={"consumed": True})
    assert codes_for(session, needle) == []
    events.record_event(session, actor=people["alba"], kind="step", item=needle,
                        occurred_at=hours(2), technique="sem-imaging")
    assert codes_for(session, needle) == ["out-of-order"]


def test_orphan_item(session, people, make_held, codes_for) -> None:
    particle = make_held()
    lamella = make_held(kind="lamella", created_at=hours(3))
    assert codes_for(session, lamella) == ["orphan-item"]
    items.derive(session, actor=people["alba"], parent=particle, child=lamella,
                 derived_at=hours(3))
    assert codes_for(session, lamella) == []


def test_cut_after_the_parent_was_consumed(session, people, make_held, codes_for) -> None:
    particle = make_held()
    events.record_event(session, actor=people["alba"], kind="step", item=particle,
                        occurred_at=hours(1), technique="split", details={"consumed": True})
    late = make_held(kind="fragment", created_at=hours(2))
    items.derive(session, actor=people["alba"], parent=particle, child=late, derived_at=hours(2))
    assert "orphan-item" in codes_for(session, late)


def test_glovebox_atmosphere(session, people, places, make_held, codes_for) -> None:
    grain = make_held()
    custody.handle(session, actor=people["alba"], item=grain, environment="n2-glovebox",
                   start=hours(1), end=hours(2), location=places["box-a"], o2_ppm=0.5, h2o_ppm=0.8)
    assert codes_for(session, grain) == []
    custody.handle(session, actor=people["alba"], item=grain, environment="n2-glovebox",
                   start=hours(3), end=hours(4), location=places["box-a"], o2_ppm=40, h2o_ppm=0.8)
    assert codes_for(session, grain) == ["environment-out-of-spec"]


def test_cleanroom_class_against_the_study(session, people, places, make_held, codes_for) -> None:
    grain = make_held()
    custody.handle(session, actor=people["alba"], item=grain, environment="cleanroom",
                   start=hours(1), end=hours(2), location=places["clean-a"])  # ISO 6 room
    assert codes_for(session, grain) == []  # no requirement without a study
    study = studies.create_study(session, actor="test", code="S-ISO5", title="t",
                                 rules={"required_iso_class": 5})
    studies.enrol(session, actor="test", study=study, item=grain)
    assert codes_for(session, grain) == ["environment-out-of-spec"]


def test_pristine_broken(session, people, make_held, codes_for) -> None:
    kept, ordinary, capsule = make_held(is_pristine=True), make_held(), make_held(kind="capsule")
    items.place(session, actor=people["alba"], item=kept, container=capsule, placed_at=hours(0))
    custody.handle(session, actor=people["alba"], item=ordinary, environment="air",
                   start=hours(1), end=hours(2))
    custody.handle(session, actor=people["alba"], item=kept, environment="n2-glovebox",
                   start=hours(1), end=hours(2), o2_ppm=0.1, h2o_ppm=0.1)
    assert codes_for(session, ordinary) == [] and codes_for(session, kept) == []
    custody.handle(session, actor=people["alba"], item=capsule, environment="air",
                   start=hours(3), end=hours(3.5))
    assert codes_for(session, kept) == ["pristine-broken"]


def test_a_corrected_event_is_judged_by_its_correction(session, people, places, make_held,
                                                      codes_for) -> None:
    grain = make_held()
    bad = custody.handle(session, actor=people["alba"], item=grain, environment="n2-glovebox",
                         start=hours(1), end=hours(2), o2_ppm=40, h2o_ppm=0.5)
    assert codes_for(session, grain) == ["environment-out-of-spec"]
    events.correct_event(session, actor=people["alba"], original=bad,
                         reason="O2 typed in the wrong unit",
                         details={"o2_ppm": 0.4, "h2o_ppm": 0.5})
    assert codes_for(session, grain) == []


def test_glovebox_log_over_the_handling_window(session, people, places, make_held,
                                               codes_for) -> None:
    from curation.services import environment as env

    grain = make_held()
    custody.handle(session, actor=people["alba"], item=grain, environment="n2-glovebox",
                   start=hours(1), end=hours(2), location=places["box-a"])
    env.import_atmosphere_csv(session, actor=people["alba"], location=places["box-a"], text=(
        "measured_at,o2_ppm,h2o_ppm\n"
        f"{hours(0.5).isoformat()},30,0.2\n"   # before the window: does not count
        f"{hours(1.5).isoformat()},0.4,0.3\n"))
    assert codes_for(session, grain) == []
    env.record_atmosphere(session, actor=people["alba"], location=places["box-a"],
                          measured_at=hours(1.8), o2_ppm=0.3, h2o_ppm=12)
    assert codes_for(session, grain) == ["environment-out-of-spec"]
