"""Build the invented demo scenario through the services, so the ledger holds every row.

One allocation of returned particles travels from a curation facility to a first laboratory
(glovebox opening, XCT, coating, SEM/EDS/EBSD, FIB lift-out of lamellae and atom-probe
needles) and on to a second (TEM, STEM-EELS, atom probe). Three problems are planted for the
audits to find: a hand-over released but never received, an atom-probe run logged at the
instrument while custody says the needle is in the store, and an air exposure of a pristine
particle. Everything is deterministic: the same database comes out every time.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from sqlalchemy import func, select
from sqlalchemy.orm import InstrumentedAttribute, Session

from curation.demo_data import lab_a, lab_b, second_loan, users
from curation.demo_data.scene import PlantedProblem, Scene, minutes
from curation.demo_data.setting import (
    BODY,
    CAPSULE,
    CAPSULE_SEAL,
    CARRIER,
    CONTROLS,
    CORRELATIVE,
    DEMO_ACTOR,
    FACILITY,
    INDICATORS,
    INSTRUMENTS,
    LAB_A,
    LOCATIONS,
    MISSION,
    PARTICLES,
    PEOPLE,
    STATIONS,
    at_a,
    at_facility,
)
from curation.model import Event, Item, LedgerEntry, Person
from curation.services import accounts, allocations, controls, stations, studies

#: the facility's reference for the loan
ALLOCATION_REFERENCE = "AMB-2025-031"
STUDY_CODE = "PEL-RIM-H2O"


@dataclass
class DemoSummary:
    """What the scenario wrote, and the planted problems with their items and events."""

    mission: str
    body: str
    items_by_kind: dict[str, int]
    events_by_kind: dict[str, int]
    people: int
    ledger_entries: int
    problems: list[PlantedProblem] = field(default_factory=list)
    #: particles taken through the whole correlative sequence
    correlative_particles: tuple[str, ...] = ()
    #: (superseded event id, correcting event id)
    corrections: list[tuple[int, int]] = field(default_factory=list)

    @property
    def items(self) -> int:
        return sum(self.items_by_kind.values())

    @property
    def events(self) -> int:
        return sum(self.events_by_kind.values())

    def problem(self, code: str) -> PlantedProblem:
        """The planted problem with this finding code."""
        return next(p for p in self.problems if p.code == code)


def build(session: Session) -> DemoSummary:
    """Write the whole demo scenario into an empty, migrated database (flushes, no commit)."""
    scene = Scene(session)
    for section in SECTIONS:
        section(scene)
    return summarise(scene)


def _cast(scene: Scene) -> None:
    """People, places, instruments and stations: system rows, written as the demo actor."""
    s = scene.session
    for role, (username, name, affiliation) in PEOPLE.items():
        scene.people[role] = accounts.add_person(
            s, actor=DEMO_ACTOR, username=username, name=name, affiliation=affiliation)
    for code, name, kind, laboratory, iso_class in LOCATIONS:
        scene.places[code] = stations.add_location(
            s, actor=DEMO_ACTOR, code=code, name=name, kind=kind, laboratory=laboratory,
            iso_class=iso_class)
    instruments = {}
    for code, name, techniques, where in INSTRUMENTS:
        instruments[code] = stations.add_instrument(
            s, actor=DEMO_ACTOR, code=code, name=name, location=scene.places[where],
            techniques=techniques)
    for code, name, instrument, where in STATIONS:
        scene.stations[code] = stations.add_station(
            s, actor=DEMO_ACTOR, code=code, name=name,
            instrument=instruments[instrument] if instrument else None,
            location=scene.places[where])


def _study_and_allocation(scene: Scene) -> None:
    """The investigator's study with its rules, and the facility's loan."""
    pi = scene.people["pi"]
    scene.study = studies.create_study(
        scene.session, actor=DEMO_ACTOR, code=STUDY_CODE, lead=pi,
        title="Water and hydroxyl in the space-weathered rims of Karvessa particles",
        description=f"Correlative XCT to atom-probe study of particles from the {MISSION}.",
        rules={
            "max_air_minutes": 0,
            "max_o2_ppm": 1.0,
            "max_h2o_ppm": 2.0,
            "required_iso_class": 5.0,
            "max_electron_dose_e_per_A2": 100,
            "required_environment": "n2-glovebox",
            "technique_order": ["xct", "sem-imaging", "eds", "ebsd", "fib-liftout",
                                "tem-imaging", "stem-eels", "apt"],
        })
    for code, name, unit, base, u, kind, limit, source in INDICATORS:
        scene.indicators[code] = controls.define_indicator(
            scene.session, actor=DEMO_ACTOR, study=scene.study, code=code, name=name, unit=unit,
            baseline_value=base, baseline_uncertainty=u, threshold_kind=kind,
            threshold_value=limit, baseline_source=source)
    scene.allocation = allocations.open_allocation(
        scene.session, actor=DEMO_ACTOR, reference=ALLOCATION_REFERENCE, facility=FACILITY,
        investigator=pi, starts_at=at_facility("2025-10-06 10:00"),
        report_due_at=at_facility("2027-06-30 00:00"),
        expires_at=at_facility("2027-10-06 00:00"), approving_body=second_loan.COMMITTEE,
        laboratory=LAB_A,
        conditions="Handle under dry nitrogen only; no air exposure; return the unused "
                   "particles and every mount by the expiry date.")


def _register_particles(scene: Scene) -> None:
    """The facility registers the capsule and the twelve particles it holds."""
    packed = at_facility("2025-10-07 09:00")
    scene.register("facility", CAPSULE, "capsule", packed, status="stored",
                   material="stainless-steel body, fluoroelastomer seals, N2 backfill",
                   description="Sealed transfer capsule with 12 numbered wells")
    for spec in PARTICLES:
        by_xct = spec.method == "xct"
        scene.register(
            "facility", spec.code, "particle", packed, material=spec.material, is_pristine=True,
            description=f"Returned particle, {MISSION}, {BODY}; "
                        f"{spec.diameter_um:g} um equivalent-sphere diameter",
            mass_ug=spec.mass_ug, mass_uncertainty_ug=spec.mass_uncertainty_ug,
            mass_method=spec.method, volume_um3=spec.volume_um3 if by_xct else None,
            volume_uncertainty_um3=round(spec.volume_um3 * 0.05, -1) if by_xct else None,
            volume_method="xct" if by_xct else None)


def _pack_at_facility(scene: Scene) -> None:
    """Particles go into the capsule's wells, are issued under the allocation, and sealed."""
    start = at_facility("2025-10-07 09:30")
    assert scene.allocation is not None
    for n, spec in enumerate(PARTICLES, 1):
        scene.place("facility", spec.code, CAPSULE, start + minutes(2 * (n - 1)),
                    position=f"well-{n:02d}")
        allocations.issue_item(
            scene.session, actor=DEMO_ACTOR, allocation=scene.allocation,
            item=scene.items[spec.code], issued_at=at_facility("2025-10-07 11:00"),
            allocated_mass_ug=spec.mass_ug, condition_on_receipt="sealed in capsule, N2")
    scene.seal("facility", CAPSULE, "seal-applied", CAPSULE_SEAL,
               at_facility("2025-10-07 10:05"), "AMB-VAULT")


def _ship_to_lab_a(scene: Scene) -> None:
    """The facility releases the capsule to the first laboratory's curator, by courier."""
    tracking = {"carrier": CARRIER, "tracking_id": "TWX-5521-0093"}
    scene.release("facility", "curator_a", CAPSULE, at_facility("2025-10-07 11:00"), "AMB-VAULT")
    scene.custody("facility", CAPSULE, "shipped", at_facility("2025-10-07 11:30"), "TRANSIT",
                  to="curator_a",
                  details={**tracking, "condition": "sealed; N2 backfill; shock logger armed"})
    scene.custody("curator_a", CAPSULE, "delivered", at_a("2025-10-09 14:10"), "VPL-LAB",
                  details={**tracking, "condition": "outer case intact; shock logger under 5 g"})
    scene.receive("curator_a", "facility", CAPSULE, at_a("2025-10-09 14:25"), "VPL-LAB")
    scene.seal("curator_a", CAPSULE, "seal-checked", CAPSULE_SEAL, at_a("2025-10-09 14:30"),
               "VPL-LAB")
    scene.store("curator_a", CAPSULE, at_a("2025-10-09 14:50"), "VPL-STORE",
                "N2 cabinet 2, shelf 1")
    for spec in PARTICLES:
        scene.status("curator_a", spec.code, "stored")


def _enrol(scene: Scene) -> None:
    """Specimens and controls join the study."""
    assert scene.study is not None
    for spec in PARTICLES:
        studies.enrol(scene.session, actor=DEMO_ACTOR, study=scene.study,
                      item=scene.items[spec.code], role="specimen")
    for code in CONTROLS:
        studies.enrol(scene.session, actor=DEMO_ACTOR, study=scene.study,
                      item=scene.items[code], role="control")


#: the scenario in order; each section reads what the earlier ones wrote
SECTIONS = (
    _cast,
    _study_and_allocation,
    _register_particles,
    _pack_at_facility,
    _ship_to_lab_a,
    lab_a.register_controls_and_holders,
    _enrol,
    lab_a.open_in_glovebox,
    lab_a.mount_particles,
    lab_a.split_friable_particle,
    lab_a.close_glovebox_session,
    lab_a.plant_air_exposure,
    lab_a.xct,
    lab_a.coat,
    lab_a.sem,
    lab_a.fib,
    lab_a.read_blank,
    lab_b.ship_to_lab_b,
    lab_b.unpack,
    lab_b.tem,
    lab_b.apt,
    lab_b.plant_step_away_from_custody,
    lab_a.plant_unreceived_return,
    second_loan.first_loan_paperwork,
    second_loan.open_second_loan,
    second_loan.to_lab_a,
    second_loan.open_and_cut,
    second_loan.return_lamella,
    second_loan.plant_missing_needle,
    second_loan.transfer_needles,
    users.open_logins,
)


def _counts(session: Session, column: InstrumentedAttribute[str]) -> dict[str, int]:
    rows = session.execute(select(column, func.count()).group_by(column).order_by(column))
    return {str(key): int(n) for key, n in rows}


def summarise(scene: Scene) -> DemoSummary:
    """Count what is in the database and list the planted problems."""
    s = scene.session
    return DemoSummary(
        mission=MISSION, body=BODY,
        items_by_kind=_counts(s, Item.kind),
        events_by_kind=_counts(s, Event.kind),
        people=int(s.scalar(select(func.count()).select_from(Person)) or 0),
        ledger_entries=int(s.scalar(select(func.count()).select_from(LedgerEntry)) or 0),
        problems=list(scene.problems),
        correlative_particles=CORRELATIVE,
        corrections=list(scene.corrections),
    )


__all__ = ["DEMO_ACTOR", "DemoSummary", "PlantedProblem", "build", "summarise"]
