"""record_step and check_step: refusals with their messages, dose against CODATA, sessions over
several items, double submits, and the items a destructive step makes."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import pytest
from scipy import constants
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from curation import history, ledger
from curation.errors import InvalidInput, RuleViolation
from curation.model import Derivation, Event, Item, LedgerEntry, Person, Placement, Station
from curation.services import items, stations, steps
from curation.services.steps import Children, WarningsNeedConfirmation
from curation.techniques import ValidationFailed, dose_for, validate
from tests.conftest import hours

#: a plain SEM image: 1 nA for 1 s over 1 µm²
SEM = {"accelerating_voltage_kV": "5", "beam_current_nA": "1", "detector": "secondary_electron",
       "exposure_time_s": "1", "exposed_area_um2": "1"}
#: Ga+ annular milling of three needles, 90 pA for 10 min over 4 µm²
SHARPEN = {"ion_species": "Ga", "accelerating_voltage_kV": "30", "beam_current_nA": "90 pA",
           "needle_count": "3", "exposure_time_s": "600", "exposed_area_um2": "4",
           "removed_volume_um3": "30"}
TRENCH = {"ion_species": "Ga", "accelerating_voltage_kV": "30", "beam_current_nA": "6.5"}


@dataclass
class Lab:
    actor: Person
    fib: Station
    bench: Station


@pytest.fixture
def lab(session: Session, operator: Person) -> Lab:
    room = stations.add_location(session, actor=operator, code="RM-FIB", name="FIB room",
                                 kind="instrument")
    box = stations.add_location(session, actor=operator, code="GB-9", name="Glovebox 9",
                                kind="glovebox")
    fib = stations.add_instrument(session, actor=operator, code="FIB-A", name="Dual-beam A",
                                  location=room, techniques="sem fib")
    return Lab(operator,
               stations.add_station(session, actor=operator, code="ST-FIB", name="FIB PC",
                                    instrument=fib, location=room),
               stations.add_station(session, actor=operator, code="ST-GB", name="Glovebox tablet",
                                    instrument=None, location=box))


def record(session: Session, lab: Lab, targets: list[Item], technique: str,
           params: dict[str, Any], **extra: Any) -> steps.StepResult:
    extra.setdefault("station", lab.fib)
    return steps.record_step(session, actor=lab.actor, technique=technique, items=targets,
                             occurred_at=hours(1), ended_at=hours(1.5), raw_params=params,
                             **extra)


def count(session: Session, model: Any) -> int:
    return session.scalar(select(func.count()).select_from(model)) or 0


# ---- dose -----------------------------------------------------------------------------


def test_electron_dose_is_the_codata_worked_example(session, lab, make_item) -> None:
    particle = make_item()
    event = record(session, lab, [particle], "sem-imaging", SEM).events[0]
    # REFERENCES.md: 1 nA for 1 s over 1 µm² = 62.4150907446076 e⁻/Å²; here from scipy's
    # CODATA e: 1e-9 C / (e × 1 µm² in Å²)
    by_codata = 1e-9 * 1 / (constants.e * (1e-6 / constants.angstrom) ** 2)
    assert event.electron_dose_e_per_A2 == pytest.approx(62.4150907446076, rel=1e-12)
    assert event.electron_dose_e_per_A2 == pytest.approx(by_codata, rel=1e-12)
    assert event.dose_rate_e_per_A2_s == pytest.approx(by_codata, rel=1e-12)  # over 1 s
    assert event.ion_fluence_ions_per_cm2 is None and not event.is_dose_reported
    expected = dose_for("sem-imaging", validate("sem-imaging", SEM).values)
    assert event.electron_dose_e_per_A2 == expected.electron_dose_e_per_A2
    assert event.details == validate("sem-imaging", SEM).values
    assert event.is_destructive is False and event.location_id == lab.fib.location_id


def test_ion_fluence_is_stored_from_current_time_and_area(session, lab, make_item) -> None:
    wedge = make_item(kind="wedge", code="KR-0302-W1")
    coupon = make_item(kind="coupon", code="CPN-1")
    event = record(session, lab, [wedge], "fib-needle-sharpening", SHARPEN,
                   children=Children(coupon=coupon, first_post=3)).events[0]
    # Ga+ (q = 1): 0.09 nA × 600 s / (e × 4 µm² in cm²), CODATA e from scipy
    by_codata = 0.09e-9 * 600 / (constants.e * 4 * (1e-4) ** 2)
    assert event.ion_fluence_ions_per_cm2 == pytest.approx(by_codata, rel=1e-12)
    assert event.electron_dose_e_per_A2 is None and event.is_destructive


def test_reported_dose_is_kept_and_marked(session, lab, make_item) -> None:
    reported = {**SEM, "electron_dose_e_per_A2": "12"}
    event = record(session, lab, [make_item()], "sem-imaging", reported).events[0]
    assert event.electron_dose_e_per_A2 == 12 and event.is_dose_reported


# ---- refusals -------------------------------------------------------------------------


def test_unknown_technique_is_refused_naming_it(session, lab, make_item) -> None:
    with pytest.raises(InvalidInput) as refused:
        record(session, lab, [make_item()], "fib-wizardry", {})
    assert refused.value.field == "technique"
    assert "'fib-wizardry' is not allowed (one of xct, " in str(refused.value)


def test_technique_not_on_the_instrument_names_what_it_runs(session, lab, make_item) -> None:
    with pytest.raises(InvalidInput) as refused:
        record(session, lab, [make_item()], "apt", {})
    message = str(refused.value)
    assert "apt is not run by instrument FIB-A; it runs: sem-imaging, fib-trench" in message
    assert "fib-needle-sharpening" in message and "tem-imaging" not in message


def test_bench_station_runs_only_bench_preparation(session, lab, make_item) -> None:
    with pytest.raises(InvalidInput) as refused:
        record(session, lab, [make_item()], "sem-imaging", SEM, station=lab.bench)
    assert "not run by station ST-GB (no instrument); it runs: coating, heating, split, " \
           "mounting, weighing" in str(refused.value)
    event = record(session, lab, [make_item()], "weighing", {"mass_ug": "2.4 ug"},
                   station=lab.bench).events[0]
    assert event.details == {"mass_ug": 2.4} and event.location.code == "GB-9"


def test_every_parameter_problem_at_once(session, lab, make_item) -> None:
    before = count(session, Event)
    wrong = {**SHARPEN, "beam_current_nA": "30 kV", "accelerating_voltage_kV": "99"}
    del wrong["needle_count"]
    with pytest.raises(ValidationFailed) as refused:
        record(session, lab, [make_item(kind="wedge")], "fib-needle-sharpening", wrong,
               children=Children(coupon=make_item(kind="coupon")))
    shown = refused.value.by_field
    assert shown["beam_current_nA"] == ["a value in nA (a current); '30 kV' is a voltage"]
    assert shown["accelerating_voltage_kV"] == ["allowed range above 0 and up to 50 kV"]
    assert shown["needle_count"] == ["required"]
    assert "accelerating_voltage_kV: '99' is not allowed" in str(refused.value)
    assert count(session, Event) == before  # nothing written


def test_warnings_need_confirmation_then_are_noted(session, lab, make_item) -> None:
    particle = make_item()
    hot = {**TRENCH, "beam_current_nA": "70"}
    with pytest.raises(WarningsNeedConfirmation) as asked:
        record(session, lab, [particle], "fib-trench", hot)
    assert [w.field for w in asked.value.warnings] == ["beam_current_nA"]
    assert "beam_current_nA: 70 nA is outside the typical range 0.5–65 nA" in str(asked.value)
    assert session.scalars(select(Event).where(Event.item_id == particle.id)).all() == []
    done = record(session, lab, [particle], "fib-trench", hot, confirm_warnings=True,
                  note="chunk milling at high current")
    assert [w.field for w in done.warnings] == ["beam_current_nA"]
    assert done.events[0].note == ("chunk milling at high current\nConfirmed outside the "
                                   "typical range: beam_current_nA: 70 nA is outside the "
                                   "typical range 0.5–65 nA")


def test_no_items_or_an_item_twice_is_refused(session, lab, make_item) -> None:
    with pytest.raises(InvalidInput, match="at least one item code"):
        record(session, lab, [], "fib-trench", TRENCH)
    particle = make_item()
    with pytest.raises(InvalidInput, match="each item once"):
        record(session, lab, [particle, particle], "fib-trench", TRENCH)


def test_end_before_start_is_refused(session, lab, make_item) -> None:
    with pytest.raises(InvalidInput, match="at or after occurred_at"):
        steps.record_step(session, actor=lab.actor, station=lab.fib, technique="fib-trench",
                          items=[make_item()], occurred_at=hours(2), ended_at=hours(1),
                          raw_params=TRENCH)


# ---- sessions and double submits ------------------------------------------------------


def test_one_session_over_several_items_shares_its_key(session, lab, make_item) -> None:
    needles = [make_item(kind="needle") for _ in range(3)]
    result = record(session, lab, needles, "sem-imaging", SEM, submission_key="k-123")
    assert [e.item_id for e in result.events] == [n.id for n in needles]
    assert {e.submission_key for e in result.events} == {"k-123"}
    assert len({e.electron_dose_e_per_A2 for e in result.events}) == 1
    assert result.submission_key == "k-123" and not result.is_repeat


def test_double_submit_writes_once(session, lab, make_item) -> None:
    needles = [make_item(kind="needle") for _ in range(2)]
    first = record(session, lab, needles, "sem-imaging", SEM, submission_key="twice")
    entries = count(session, LedgerEntry)
    again = record(session, lab, needles, "sem-imaging", SEM, submission_key="twice")
    assert again.is_repeat and [e.id for e in again.events] == [e.id for e in first.events]
    assert count(session, LedgerEntry) == entries  # not a single row written
    with pytest.raises(RuleViolation, match="already used for other items"):
        record(session, lab, [make_item()], "sem-imaging", SEM, submission_key="twice")


def test_racing_double_submit_trips_the_unique_key_and_answers_as_repeat(
        session, lab, make_item, monkeypatch) -> None:
    particle = make_item()
    first = record(session, lab, [particle], "sem-imaging", SEM, submission_key="race")
    real, calls = steps.repeated, []

    def blind_once(*args: Any) -> Any:
        # the second request looked before the first one had committed
        calls.append(args)
        return None if len(calls) == 1 else real(*args)

    monkeypatch.setattr(steps, "repeated", blind_once)
    again = record(session, lab, [particle], "sem-imaging", SEM, submission_key="race")
    assert len(calls) == 2 and again.is_repeat
    assert [e.id for e in again.events] == [e.id for e in first.events]
    assert ledger.verify(session).ok


# ---- items a destructive step makes ---------------------------------------------------


def test_lift_outs_name_children_after_the_parent(session, lab, make_item) -> None:
    particle = make_item(code="KR-0302", material="phyllosilicate", is_pristine=True)
    made = []
    for kind in ("lamella", "lamella", "wedge"):
        params = {**TRENCH, "beam_current_nA": "0.3", "child_kind": kind,
                  "removed_volume_um3": "7400"}
        made += record(session, lab, [particle], "fib-liftout", params,
                       children=Children()).children
    assert [c.code for c in made] == ["KR-0302-L1", "KR-0302-L2", "KR-0302-W1"]
    assert [c.kind for c in made] == ["lamella", "lamella", "wedge"]
    assert all(c.material == "phyllosilicate" and c.is_pristine for c in made)
    links = session.scalars(select(Derivation).where(Derivation.parent_id == particle.id)).all()
    assert [d.removed_volume_um3 for d in links] == [7400.0] * 3
    assert all(d.derived_at == hours(1.5) for d in links)  # at the end of the session


def test_needles_on_numbered_posts_skip_taken_codes(session, lab, make_item) -> None:
    wedge = make_item(kind="wedge", code="KR-0302-W1")
    coupon = make_item(kind="coupon", code="CPN-12")
    make_item(kind="needle", code="KR-0302-W1-N2")  # registered by hand earlier
    result = record(session, lab, [wedge], "fib-needle-sharpening", SHARPEN,
                    children=Children(coupon=coupon, first_post=3))
    step = result.events[0]
    assert [c.code for c in result.children] == ["KR-0302-W1-N1", "KR-0302-W1-N3",
                                                 "KR-0302-W1-N4"]
    placed = session.execute(select(Item.code, Placement.position, Placement.placed_at)
                             .join(Placement, Placement.item_id == Item.id)
                             .where(Placement.container_id == coupon.id)
                             .order_by(Placement.position)).all()
    assert placed == [("KR-0302-W1-N1", "post-03", hours(1.5)),
                      ("KR-0302-W1-N3", "post-04", hours(1.5)),
                      ("KR-0302-W1-N4", "post-05", hours(1.5))]
    links = session.scalars(select(Derivation).where(Derivation.step_id == step.id)).all()
    assert {d.parent_id for d in links} == {wedge.id}
    assert [d.removed_volume_um3 for d in links] == [10.0, 10.0, 10.0]  # 30 µm³ shared
    assert "made 3 needle(s) KR-0302-W1-N1, KR-0302-W1-N3, KR-0302-W1-N4" in step.summary
    # the sharpening reaches each needle's history from the wedge it was cut from
    seen = history.effective_history(session, result.children[0].id)
    assert [h.event.id for h in seen if h.event.technique == "fib-needle-sharpening"] == [step.id]
    assert ledger.verify(session).ok


def test_occupied_post_is_refused_naming_it(session, lab, make_item) -> None:
    wedge, coupon = make_item(kind="wedge", code="W-9"), make_item(kind="coupon", code="CPN-9")
    items.place(session, actor=lab.actor, item=make_item(kind="needle", code="OLD-N1"),
                container=coupon, placed_at=hours(0), position="post-04")
    before = count(session, Item)
    with pytest.raises(InvalidInput) as refused:
        record(session, lab, [wedge], "fib-needle-sharpening", SHARPEN,
               children=Children(coupon=coupon, first_post=3))
    assert refused.value.field == "first_post"
    assert "post-04 of CPN-9 already holds OLD-N1" in str(refused.value)
    assert count(session, Item) == before


@pytest.mark.parametrize("children, field, words", [
    (Children(), "coupon", "the code of the coupon the needles stand on"),
    (Children(kind="lamella"), "child_kind",
     "one of the kinds fib-needle-sharpening makes: needle"),
    (Children(count=2), "needle_count", "the number of items made: 2"),
])
def test_children_that_do_not_fit_are_refused(session, lab, make_item, children, field,
                                               words) -> None:
    with pytest.raises(InvalidInput) as refused:
        record(session, lab, [make_item(kind="wedge")], "fib-needle-sharpening", SHARPEN,
               children=children)
    assert refused.value.field == field and words in str(refused.value)


def test_a_step_that_makes_nothing_refuses_children(session, lab, make_item) -> None:
    with pytest.raises(InvalidInput, match="fib-trench makes no new items"):
        record(session, lab, [make_item()], "fib-trench", TRENCH, children=Children())
    with pytest.raises(InvalidInput, match="one item when the step makes new items"):
        record(session, lab, [make_item(), make_item()], "fib-liftout",
               {**TRENCH, "beam_current_nA": "0.3", "child_kind": "wedge"},
               children=Children())


def test_check_step_plans_without_writing(session, lab, make_item) -> None:
    wedge = make_item(kind="wedge", code="PW-1")
    coupon = make_item(kind="coupon")
    entries = count(session, LedgerEntry)
    plan = steps.check_step(session, station=lab.fib, technique="fib-needle-sharpening",
                            items=[wedge], raw_params=SHARPEN,
                            children=Children(coupon=coupon, first_post=7))
    assert [(c.code, c.position) for c in plan.children] == [
        ("PW-1-N1", "post-07"), ("PW-1-N2", "post-08"), ("PW-1-N3", "post-09")]
    assert plan.dose is not None and plan.dose.ion_fluence_ions_per_cm2 > 0
    session.flush()
    assert count(session, LedgerEntry) == entries
