"""The allocations' paperwork and a second loan from the same facility.

The first loan gains its members (who may work on its items), a submitted report and a
data set. The second loan issues one more particle to the first laboratory: a lamella cut from
it goes back to the facility on its own grid (a return), two needles travel on a coupon to the
second laboratory under a sub-allocation with their own custody chain, and a third needle is
taken off its post and never recorded again (planted: `allocation-unbalanced`). The rest of the
particle stays on its mount, so every other item of the second loan balances.
"""

from __future__ import annotations

from sqlalchemy import select

from curation.demo_data import lab_a
from curation.demo_data.lab_b import APT_SETTINGS
from curation.demo_data.scene import Scene, minutes
from curation.demo_data.setting import (
    BODY,
    CARRIER,
    FACILITY,
    LAB_A,
    LAB_B,
    MISSION,
    OLIVINE_FO92,
    ParticleSpec,
    at_a,
    at_b,
    at_facility,
)
from curation.model import Allocation, Event
from curation.services import allocations

SECOND_REFERENCE, TRANSFER_REFERENCE = "AMB-2026-004", "AMB-2026-004-T1"
COMMITTEE = "Amberlane Sample Allocation Committee"
SECOND = ParticleSpec("KR-0313", "olivine (Fo92) with a phyllosilicate rim", 150, OLIVINE_FO92,
                      "weighed")
CAPSULE2, SEAL2 = "PEL-TC-09", "AMB-S-004502"
MOUNT3, GRID5, COUPON14 = "VPL-MNT-03", "VPL-GRID-05", "VPL-CPN-14"
#: the needle taken off its post and never recorded again (planted)
MISSING_NEEDLE = f"{SECOND.code}-N3"
#: (role, allocation role) of the first loan's members besides its investigator
FIRST_MEMBERS = (("curator_a", "curator"), ("xct", "analyst"), ("fib", "analyst"),
                 ("curator_b", "curator"), ("tem", "analyst"), ("apt", "analyst"))
HOLDERS = (
    (MOUNT3, "mount", "aluminium stub with conductive carbon tab", "rack 3, position 3"),
    (GRID5, "grid", "copper lift-out half-grid, posts A-D", "rack 4, position 4"),
    (COUPON14, "coupon", "silicon coupon with 22 flat-top posts numbered 01-22",
     "rack 4, position 5"),
)


def first_loan_paperwork(scene: Scene) -> None:
    """Members, a submitted report, a later period and a data set for the first loan."""
    first = scene.allocation
    assert first is not None
    scene.allocations[first.reference] = first
    s, who = scene.session, scene.people["pi"]
    for role, as_what in FIRST_MEMBERS:
        allocations.add_member(s, actor=who, allocation=first, person=scene.people[role],
                               role=as_what)
    _periods(scene, first, ("2025-10-06", "2026-09-30", "2026-10-31", "2026-10-28 16:00"),
             ("2026-10-01", "2027-06-30", "2027-07-31", None))
    allocations.add_output(s, actor=who, allocation=first, kind="dataset",
                           doi="10.5555/pellucid.kr03.apt-2026",
                           title="Atom-probe data sets of Karvessa particle rims", year=2026)


def _periods(scene: Scene, loan: Allocation,
             *periods: tuple[str, str, str, str | None]) -> None:
    """Reporting periods (start, end, due: facility dates), each sent at a first-lab time."""
    for start, end, due, sent in periods:
        row = allocations.add_reporting_period(
            scene.session, actor=scene.people["pi"], allocation=loan,
            period_start=at_facility(f"{start} 00:00"), period_end=at_facility(f"{end} 00:00"),
            due_at=at_facility(f"{due} 00:00"))
        if sent is not None:
            allocations.submit_report(scene.session, actor=scene.people["pi"], report=row,
                                      submitted_at=at_a(sent))


def open_second_loan(scene: Scene) -> None:
    """The facility lends one more particle, packed alone in a second capsule."""
    s, pi = scene.session, scene.people["pi"]
    loan = allocations.open_allocation(
        s, actor="demo-scenario", reference=SECOND_REFERENCE, facility=FACILITY,
        investigator=pi, starts_at=at_facility("2026-01-05 09:00"),
        report_due_at=at_facility("2028-01-31 00:00"), expires_at=at_facility("2028-01-05 00:00"),
        approving_body=COMMITTEE, laboratory=LAB_A,
        conditions="One lamella to be returned on its grid after TEM; needles may go to a "
                   "partner laboratory under a transfer; keep under dry nitrogen.")
    scene.allocations[SECOND_REFERENCE] = loan
    for role in ("curator_a", "fib"):
        allocations.add_member(s, actor=pi, allocation=loan, person=scene.people[role],
                               role="curator" if role == "curator_a" else "analyst")
    _periods(scene, loan, ("2026-01-05", "2026-06-30", "2026-07-31", "2026-07-20 10:00"),
             ("2026-07-01", "2027-06-30", "2027-07-31", None))
    packed = at_facility("2026-01-05 10:00")
    scene.register("facility", CAPSULE2, "capsule", packed, status="stored",
                   material="stainless-steel body, fluoroelastomer seals, N2 backfill",
                   description="Sealed transfer capsule with one well")
    scene.register("facility", SECOND.code, "particle", packed, material=SECOND.material,
                   is_pristine=True, mass_ug=SECOND.mass_ug,
                   mass_uncertainty_ug=SECOND.mass_uncertainty_ug, mass_method="weighed",
                   description=f"Returned particle, {MISSION}, {BODY}")
    scene.place("facility", SECOND.code, CAPSULE2, packed + minutes(10), "well-01")
    allocations.issue_item(s, actor="demo-scenario", allocation=loan,
                           item=scene.items[SECOND.code], issued_at=packed + minutes(60),
                           allocated_mass_ug=SECOND.mass_ug,
                           condition_on_receipt="sealed in capsule, N2")
    scene.seal("facility", CAPSULE2, "seal-applied", SEAL2, packed + minutes(20), "AMB-VAULT")


def _carry(scene: Scene, code: str, giver: str, taker: str, sent: str, arrived: str,
           tracking: str, store: tuple[str, str, str]) -> None:
    """A courier shipment with its custody chain: release, shipped, delivered, receipt, store."""
    start = at_facility(sent) if giver == "facility" else at_a(sent)
    end = at_b(arrived) if store[0].startswith("SBN") else (
        at_facility(arrived) if taker == "facility" else at_a(arrived))
    ship = {"carrier": CARRIER, "tracking_id": tracking}
    scene.release(giver, taker, code, start, "AMB-VAULT" if giver == "facility" else "VPL-LAB")
    scene.custody(giver, code, "shipped", start + minutes(30), "TRANSIT", to=taker,
                  details={**ship, "condition": "sealed"})
    scene.custody(taker, code, "delivered", end, store[0], details={**ship, "condition": "intact"})
    scene.receive(taker, giver, code, end + minutes(10), store[0])
    scene.store(taker, code, end + minutes(30), store[1], store[2])


def to_lab_a(scene: Scene) -> None:
    """The capsule travels to the first laboratory; holders are registered for the particle."""
    _carry(scene, CAPSULE2, "facility", "curator_a", "2026-01-06 09:00", "2026-01-08 14:00",
           "TWX-6120-0441", ("VPL-LAB", "VPL-STORE", "N2 cabinet 2, shelf 2"))
    when = at_a("2026-01-09 09:00")
    for n, (code, kind, material, slot) in enumerate(HOLDERS):
        scene.register("curator_a", code, kind, when, material=material, status="stored",
                       description=f"{kind.capitalize()} for {SECOND.code}")
        scene.store("curator_a", code, when + minutes(5 * n + 5), "VPL-GB1", slot)
    scene.status("curator_a", SECOND.code, "stored")


def open_and_cut(scene: Scene) -> None:
    """Opened under nitrogen, mounted, then a lamella and three needles at the FIB."""
    scene.check_out("curator_a", "fib", CAPSULE2, at_a("2026-01-12 08:40"), "VPL-STORE",
                    "VPL-GB1")
    scene.check_out("curator_a", "fib", MOUNT3, at_a("2026-01-12 08:45"), "VPL-GB1", "VPL-GB1")
    start = at_a("2026-01-12 09:00")
    scene.atmosphere("fib", "VPL-GB1", start, 0.4, 0.7)
    for code in (CAPSULE2, MOUNT3):
        scene.handling("fib", code, "n2-glovebox", start, start + minutes(40), "VPL-GB1",
                       o2_ppm=0.4, h2o_ppm=0.7, **lab_a.TOUCHED)
    scene.seal("fib", CAPSULE2, "seal-broken", SEAL2, start + minutes(5), "VPL-GB1")
    scene.place("fib", SECOND.code, MOUNT3, start + minutes(10), "A1")
    scene.step("fib", SECOND.code, "mounting", start + minutes(10), 4, "VPL-GB1-PC",
               {"mount_kind": "sem_stub", "adhesive": "carbon_tape", "position": "A1"})
    scene.check_in("fib", "curator_a", CAPSULE2, start + minutes(50), "VPL-GB1", "VPL-STORE",
                   "N2 cabinet 2, shelf 2 (empty)")
    scene.check_in("fib", "curator_a", MOUNT3, start + minutes(55), "VPL-GB1", "VPL-GB1",
                   HOLDERS[0][3])
    for n, code in enumerate((MOUNT3, GRID5, COUPON14)):
        scene.check_out("curator_a", "fib", code, at_a("2026-01-13 07:30") + minutes(5 * n),
                        "VPL-GB1", "VPL-FIB")
    when = at_a("2026-01-13 08:30")
    scene.step("fib", SECOND.code, "fib-cap-deposition", when, 20, "VPL-DB-PC",
               lab_a.CAP_DEPOSITION)
    scene.step("fib", SECOND.code, "fib-trench", when + minutes(25), 75, "VPL-DB-PC",
               {**lab_a.GALLIUM, "beam_current_nA": 6.5, "trench_depth_um": 10})
    lab_a.cut_lamella(scene, SECOND.code, when + minutes(105), "post-A", grid=GRID5)
    sharpened = lab_a.cut_needles(scene, SECOND.code, when + minutes(250),
                                  tuple((COUPON14, f"0{k}") for k in (1, 2, 3)))
    scene.marks["sharpened:missing"] = sharpened[-1]
    for n, code in enumerate((MOUNT3, GRID5, COUPON14)):
        scene.check_in("fib", "curator_a", code, at_a("2026-01-13 17:30") + minutes(15 * n),
                       "VPL-FIB", "VPL-GB1", HOLDERS[n][3])


def return_lamella(scene: Scene) -> None:
    """The lamella goes back to the facility on its grid, as the loan's conditions ask."""
    loan = scene.allocations[SECOND_REFERENCE]
    lamella = f"{SECOND.code}-L1"
    _carry(scene, GRID5, "curator_a", "facility", "2026-02-02 10:00", "2026-02-04 11:00",
           "TWX-6188-2207", ("AMB-VAULT", "AMB-VAULT", "return shelf 1"))
    release = next(e for e in reversed(_events(scene, GRID5)) if e.action == "release")
    scene.status("curator_a", lamella, "returned")
    allocations.record_return(
        scene.session, actor=scene.people["curator_a"], allocation=loan,
        item=scene.items[lamella], returned_at=release.occurred_at, event=release,
        condition="on grid post A, ~95 nm, intact", due_at=at_facility("2026-03-31 00:00"))


def _events(scene: Scene, code: str) -> list[Event]:
    return list(scene.session.scalars(select(Event).where(
        Event.item_id == scene.items[code].id).order_by(Event.occurred_at, Event.id)))


def plant_missing_needle(scene: Scene) -> None:
    """Planted: the third needle is taken off its post before packing and never seen again."""
    scene.take_out("fib", MISSING_NEEDLE, at_a("2026-02-03 08:10"))
    scene.plant("allocation-unbalanced", MISSING_NEEDLE, [scene.marks["sharpened:missing"]],
                f"{MISSING_NEEDLE} was taken off {COUPON14} post 03 and nothing records where "
                f"it went: no loss, consumption, return or transfer")


def transfer_needles(scene: Scene) -> None:
    """Two needles on their coupon go to the second laboratory under a sub-allocation."""
    loan = scene.allocations[SECOND_REFERENCE]
    needles = [scene.items[f"{SECOND.code}-N{k}"] for k in (1, 2)]
    sub = allocations.transfer(
        scene.session, actor=scene.people["pi"], allocation=loan,
        reference=TRANSFER_REFERENCE, laboratory=LAB_B, investigator=scene.people["apt"],
        items=needles, issued_at=at_a("2026-02-03 09:00"),
        conditions="Atom-probe analysis of two needles; report to the lending investigator.")
    scene.allocations[TRANSFER_REFERENCE] = sub
    allocations.add_member(scene.session, actor=scene.people["pi"], allocation=sub,
                           person=scene.people["curator_b"], role="curator")
    _carry(scene, COUPON14, "curator_a", "curator_b", "2026-02-03 09:30", "2026-02-05 16:00",
           "TWX-6190-3315", ("SBN-LAB", "SBN-STORE", "vacuum desiccator 3"))
    needle = needles[0].code
    scene.check_out("curator_b", "apt", COUPON14, at_b("2026-02-10 08:30"), "SBN-STORE",
                    "SBN-APT")
    scene.step("apt", needle, "apt", at_b("2026-02-10 09:00"), 220, "SBN-APT-PC",
               {**APT_SETTINGS, "ions_collected": 24_100_000, "final_voltage_kV": 6.8,
                "outcome": "completed"})
    scene.status("apt", needle, "consumed")
    scene.check_in("apt", "curator_b", COUPON14, at_b("2026-02-10 14:00"), "SBN-APT",
                   "SBN-STORE", "vacuum desiccator 3")
