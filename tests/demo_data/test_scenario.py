"""The demo scenario, built through the services on each backend: contents, lineage, history,
the planted problems and the ledger."""

from __future__ import annotations

import math

import pytest
from scipy import constants
from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import demo_data, history, ledger
from curation.audit import engine as audit
from curation.demo_data.setting import ParticleSpec
from curation.model import (
    CONTROL_KINDS,
    AllocationItem,
    Derivation,
    Event,
    Item,
    LedgerEntry,
    Placement,
    StudyItem,
)
from curation.techniques import dose_for, validate

STEP_TECHNIQUES = {
    "xct", "sem-imaging", "eds", "ebsd", "fib-trench", "fib-liftout", "fib-lamella-thinning",
    "fib-needle-sharpening", "fib-cap-deposition", "tem-imaging", "stem-eels", "tkd", "apt",
    "coating", "weighing", "split", "mounting",
}


@pytest.fixture
def demo(session: Session) -> demo_data.DemoSummary:
    return demo_data.build(session)


def _items(session: Session, **where: object) -> list[Item]:
    stmt = select(Item).order_by(Item.id)
    for name, value in where.items():
        stmt = stmt.where(getattr(Item, name) == value)
    return list(session.scalars(stmt))


def _code(session: Session, code: str) -> Item:
    return session.scalars(select(Item).where(Item.code == code)).one()


def _events(session: Session, **where: object) -> list[Event]:
    stmt = select(Event).order_by(Event.occurred_at, Event.id)
    for name, value in where.items():
        stmt = stmt.where(getattr(Event, name) == value)
    return list(session.scalars(stmt))


def test_about_a_dozen_pristine_particles_under_one_allocation(session, demo) -> None:
    particles = _items(session, kind="particle")
    assert 10 <= len(particles) <= 14
    assert demo.items_by_kind["particle"] == len(particles)
    assert all(p.is_pristine for p in particles)
    issued = list(session.scalars(select(AllocationItem)))
    first = [a for a in issued if a.allocation.reference == "AMB-2025-031"]
    assert {a.item_id for a in first} == {p.id for p in particles} - {
        _code(session, "KR-0313").id}
    # the second loan issues one more particle, and its transfer two of that particle's needles
    assert len({a.allocation_id for a in issued}) == 3
    first_homes = {session.scalars(select(Placement).where(Placement.item_id == p.id)
                                   .order_by(Placement.placed_at)).first().container.kind
                   for p in particles}
    assert first_homes == {"capsule"}


def test_masses_carry_method_and_uncertainty(session, demo) -> None:
    for particle in _items(session, kind="particle"):
        assert particle.mass_ug and particle.mass_ug > 0
        assert particle.mass_method in {"weighed", "xct"}
        assert 0 < particle.mass_uncertainty_ug < particle.mass_ug
        if particle.mass_method == "xct":
            assert particle.volume_method == "xct" and particle.volume_um3 > 0


def test_sphere_mass_matches_the_handbook_example() -> None:
    # REFERENCES.md: m = rho*pi*d^3/6; a 100 um grain at 3.4 g/cm3 is about 1.8 ug
    grain = ParticleSpec("X", "", 100, 3.4, "xct")
    assert grain.mass_ug == pytest.approx(3.4 * math.pi * 100**3 / 6 * 1e-6, rel=1e-3)
    assert grain.mass_ug == pytest.approx(1.8, abs=0.05)


def test_three_controls_one_of_each_kind_enrolled_as_controls(session, demo) -> None:
    controls = [i for i in _items(session) if i.kind in CONTROL_KINDS]
    assert sorted(c.kind for c in controls) == [
        "analogue-standard", "procedural-blank", "witness-coupon"]
    roles = {s.item_id: s.role for s in session.scalars(select(StudyItem))}
    assert all(roles.get(c.id) == "control" for c in controls)


def _lamella_and_coupon_needle(session: Session, particle: Item) -> tuple[Item, Item] | None:
    below = {d for d, _, _ in history.descendants(session, [particle.id])}
    kids = [i for i in _items(session) if i.id in below]
    lamella = next((i for i in kids if i.kind == "lamella"), None)
    for needle in (i for i in kids if i.kind == "needle"):
        home = session.scalars(select(Placement).where(Placement.item_id == needle.id)).first()
        if lamella is not None and home is not None and home.container.kind == "coupon":
            assert home.position.startswith("post-")
            return lamella, needle
    return None


def test_two_particles_yield_a_lamella_and_a_needle_on_a_coupon(session, demo) -> None:
    found = [p.code for p in _items(session, kind="particle")
             if _lamella_and_coupon_needle(session, p) is not None]
    assert len(found) >= 2
    assert set(demo.correlative_particles) <= set(found)


def test_correlative_sequence_runs_in_order(session, demo) -> None:
    order = ["xct", "sem-imaging", "eds", "ebsd", "fib-liftout"]
    for code in demo.correlative_particles:
        particle = _code(session, code)
        lamella, needle = _lamella_and_coupon_needle(session, particle)
        techniques = [h.event.technique for h in history.effective_history(session, needle.id)
                      if h.event.kind == "step"]
        firsts = [techniques.index(t) for t in order]
        assert firsts == sorted(firsts)
        assert techniques[-1] == "apt" or "fib-needle-sharpening" in techniques
        lamella_steps = {e.technique for e in _events(session, item_id=lamella.id, kind="step")}
        assert {"fib-lamella-thinning", "tem-imaging"} <= lamella_steps
        removed = session.scalars(select(Derivation.removed_volume_um3)
                                  .where(Derivation.child_id == lamella.id)).one()
        assert 0 < removed < particle.volume_um3


def test_needle_history_reaches_the_particles_xct_through_the_ancestor(session, demo) -> None:
    particle = _code(session, demo.correlative_particles[0])
    _, needle = _lamella_and_coupon_needle(session, particle)
    entries = history.effective_history(session, needle.id)
    xct = [h for h in entries if h.event.technique == "xct"]
    assert len(xct) == 1
    assert xct[0].reach == history.ANCESTOR
    assert xct[0].ancestor_id == particle.id
    assert xct[0].path[0] == needle.id and xct[0].path[-1] == particle.id


def test_every_step_uses_a_catalogue_technique_with_valid_parameters(session, demo) -> None:
    steps = _events(session, kind="step")
    assert {s.technique for s in steps} <= STEP_TECHNIQUES
    for step in steps:
        validate(step.technique, step.details)  # raises ValidationFailed naming every field
        assert step.ended_at is not None and step.ended_at > step.occurred_at


def test_steps_carry_their_computed_dose_and_a_submission_key(session, demo) -> None:
    steps = [s for s in _events(session, kind="step") if s.supersedes_id is None]
    keys = [s.submission_key for s in steps]
    assert all(keys) and len(set(keys)) == len(keys)
    for step in steps:
        dose = dose_for(step.technique, step.details)
        assert step.electron_dose_e_per_A2 == (dose.electron_dose_e_per_A2 if dose else None)
        assert step.ion_fluence_ions_per_cm2 == (dose.ion_fluence_ions_per_cm2 if dose else None)
        assert step.xray_s == (dose.xray_seconds if dose else None)
    eels = [s for s in steps if s.technique == "stem-eels"]
    # D = I·t / (e·A) (Egerton): 20 pA for 4.608 s over 0.2304 µm², CODATA e from scipy
    expected = 0.02e-9 * 4.608 / (constants.e * 0.2304 * 1e8)
    assert eels and all(s.electron_dose_e_per_A2 == pytest.approx(expected, rel=1e-12)
                        for s in eels)
    assert expected < 100  # the study's limit, as the scenario intends


def test_glovebox_and_cleanroom_handling_record_their_conditions(session, demo) -> None:
    gloves = _events(session, kind="handling", environment="n2-glovebox")
    rooms = _events(session, kind="handling", environment="cleanroom")
    assert gloves and rooms
    assert all({"o2_ppm", "h2o_ppm"} <= set(e.details) for e in gloves)
    assert all(e.details.get("iso_class") == e.location.iso_class for e in rooms)
    assert all(e.ended_at > e.occurred_at for e in gloves + rooms)


def test_shipments_carry_carrier_tracking_and_condition(session, demo) -> None:
    moves = _events(session, kind="custody", action="shipped")
    moves += _events(session, kind="custody", action="delivered")
    assert len(moves) >= 4
    assert all({"carrier", "tracking_id", "condition"} <= set(e.details) for e in moves)
    seals = _events(session, kind="custody", action="seal-applied")
    assert seals and all(e.details.get("seal_id") for e in seals)
    assert all(e.details.get("slot") for e in _events(session, kind="custody", action="store"))


def test_correction_supersedes_and_both_stay_visible(session, demo) -> None:
    assert demo.corrections
    for old_id, new_id in demo.corrections:
        old, new = session.get(Event, old_id), session.get(Event, new_id)
        assert new.supersedes_id == old.id
        assert old.details["beam_current_nA"] != new.details["beam_current_nA"]


def _unreceived_releases(session: Session) -> list[Event]:
    """Releases whose next hand-over event on the same item is not the counterparty's receipt."""
    hand_overs = [e for e in _events(session, kind="custody") if e.action in ("release", "receipt")]
    missing = []
    for n, ev in enumerate(hand_overs):
        if ev.action != "release":
            continue
        later = [e for e in hand_overs[n + 1:] if e.item_id == ev.item_id]
        nxt = later[0] if later else None
        if nxt is None or nxt.action != "receipt" or nxt.actor_id != ev.counterparty_id:
            missing.append(ev)
    return missing


def test_planted_release_without_receipt(session, demo) -> None:
    planted = demo.problem("unreceived-transfer")
    release = session.get(Event, planted.event_ids[0])
    assert release.action == "release" and release.counterparty_id is not None
    assert release.item.code == planted.item_code
    assert [e.id for e in _unreceived_releases(session)] == [release.id]


def _custody_place(session: Session, step: Event) -> int | None:
    """Where the last custody event reaching the item before the step puts it."""
    entries = history.effective_history(session, step.item_id, until=step.occurred_at)
    placed = [h.event for h in entries if h.event.kind == "custody"
              and h.event.location_id is not None and h.event.occurred_at <= step.occurred_at]
    return placed[-1].location_id if placed else None


def test_planted_step_away_from_custody(session, demo) -> None:
    planted = demo.problem("location-conflict")
    stored, run = (session.get(Event, i) for i in planted.event_ids)
    assert run.kind == "step" and run.item.code == planted.item_code
    assert stored.action == "store" and stored.location_id != run.location_id
    astray = [s.id for s in _events(session, kind="step")
              if _custody_place(session, s) != s.location_id]
    assert astray == [run.id]


def test_planted_air_exposure_of_a_pristine_particle(session, demo) -> None:
    planted = demo.problem("pristine-broken")
    exposure = session.get(Event, planted.event_ids[0])
    assert exposure.kind == "handling" and exposure.environment == "air"
    assert exposure.item.is_pristine and exposure.item.code == planted.item_code
    air_on_pristine = [e.id for e in _events(session, kind="handling", environment="air")
                       if e.item.is_pristine]
    assert air_on_pristine == [exposure.id]


def test_the_audit_finds_exactly_the_planted_problems(session, demo) -> None:
    # Each planted problem is named by the finding code the audit should raise for it.
    found = {(f.item_code, f.code) for f in audit.audit(session)}
    assert found == {(p.item_code, p.code) for p in demo.problems}


def test_ledger_is_complete_and_starts_with_the_demo_actor(session, demo) -> None:
    result = ledger.verify(session)
    assert result.ok, result.problems[:5]
    assert result.entries == demo.ledger_entries
    first = session.scalars(select(LedgerEntry).order_by(LedgerEntry.seq)).first()
    assert first.actor == demo_data.DEMO_ACTOR


def test_summary_counts_match_the_database(session, demo) -> None:
    assert demo.items == len(_items(session))
    assert demo.events == len(_events(session))
    assert demo.events_by_kind["step"] == len(_events(session, kind="step"))
