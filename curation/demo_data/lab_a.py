"""The first laboratory: glovebox opening, mounting, XCT, coating, SEM/EDS/EBSD, FIB lift-outs.

Each instrument session is bracketed by custody: the curator hands the holder to the
operator at the instrument, and takes it back into its store slot afterwards.
"""

from __future__ import annotations

from datetime import datetime
from typing import Any

from curation.demo_data.scene import Scene, minutes
from curation.demo_data.setting import (
    AIR_EXPOSED,
    ANALOGUE,
    BLANK,
    CAPSULE,
    CAPSULE_SEAL,
    CARRIER,
    CORRELATIVE,
    COUPON,
    GRID,
    MOUNT_01,
    MOUNT_02,
    PARTICLES,
    RESERVE_COUPON,
    SPLIT,
    VACUUM_CAPSULE,
    WITNESS,
    at_a,
)
from curation.model import Event
from curation.services import environment as readings
from curation.services import events

SPECS = {p.code: p for p in PARTICLES}
GLOVEBOX_A = {"o2_ppm": 0.4, "h2o_ppm": 0.7}
#: what touches a specimen on the bench (from the controlled list of contact materials)
TOUCHED = {"contact_materials": ["stainless-steel", "carbon-tape"],
           "tools": ["solvent-cleaned tweezers", "nitrile gloves"]}
#: XCT survey: one particle that stops here, and the two that go all the way
XCT_SCANNED = ("KR-0301", *CORRELATIVE)
#: processed alongside each other from SEM on: the correlative particles and the analogue
ALONGSIDE = (*CORRELATIVE, ANALOGUE)
#: the particle whose trench current was mistyped, then corrected
MISTYPED = CORRELATIVE[0]

#: (code, kind, material, description, store, slot, extra fields)
LAB_ITEMS: list[tuple[str, str, str, str, str, str, dict[str, Any]]] = [
    (BLANK, "procedural-blank", "high-purity silicon chip on a carbon tab, no sample",
     "Procedural blank left open on the cleanroom bench during preparation sessions",
     "VPL-CR", "bench 2, open dish", {}),
    (ANALOGUE, "analogue-standard", "terrestrial lizardite serpentinite chip",
     "Terrestrial analogue standard processed alongside the particles", "VPL-GB1",
     "rack 1, position 1",
     {"mass_ug": 21.6, "mass_uncertainty_ug": 0.3, "mass_method": "weighed"}),
    (WITNESS, "witness-coupon", "polished silicon witness coupon",
     "Witness coupon that sits with the specimens in the glovebox and travels with them",
     "VPL-GB1", "rack 1, position 2", {}),
    (MOUNT_01, "mount", "aluminium stub with conductive carbon tab",
     "Particle mount, positions A1-A6 and S1", "VPL-GB1", "rack 3, position 1", {}),
    (MOUNT_02, "mount", "aluminium stub with conductive carbon tab",
     "Particle mount, positions A1-A6 and B1-B2", "VPL-GB1", "rack 3, position 2", {}),
    (GRID, "grid", "copper lift-out half-grid, posts A-D", "TEM lift-out grid", "VPL-GB1",
     "rack 4, position 1", {}),
    (COUPON, "coupon", "silicon coupon with 22 flat-top posts numbered 01-22",
     "Atom-probe needle coupon", "VPL-GB1", "rack 4, position 2", {}),
    (RESERVE_COUPON, "coupon", "silicon coupon with 22 flat-top posts numbered 01-22",
     "Coupon of spare atom-probe needles, kept at this laboratory", "VPL-GB1",
     "rack 4, position 3", {}),
    (VACUUM_CAPSULE, "capsule", "stainless-steel vacuum transfer capsule",
     "Vacuum transfer capsule for holders travelling between laboratories", "VPL-GB1",
     "antechamber shelf", {}),
]

SLOTS = {code: slot for code, _, _, _, _, slot, _ in LAB_ITEMS}

SEM_SESSIONS: list[tuple[str, int, dict[str, Any]]] = [
    ("sem-imaging", 20, {"accelerating_voltage_kV": 5, "beam_current_nA": 0.1,
                         "working_distance_mm": 4.0, "detector": "secondary_electron",
                         "scan_pixels": 1536 * 1024, "dwell_time_us": 3, "frame_count": 1,
                         "exposure_time_s": 4.7, "exposed_area_um2": 15000}),
    ("eds", 45, {"accelerating_voltage_kV": 15, "beam_current_nA": 1.6,
                 "working_distance_mm": 10.0, "acquisition_mode": "map",
                 "scan_pixels": 512 * 384, "dwell_time_us": 50, "frame_count": 40,
                 "exposure_time_s": 393, "live_time_s": 360, "exposed_area_um2": 12600}),
    ("ebsd", 60, {"accelerating_voltage_kV": 20, "beam_current_nA": 4.0, "sample_tilt_deg": 70,
                  "working_distance_mm": 15.0, "step_size_um": 0.15, "scan_pixels": 200 * 200,
                  "dwell_time_us": 100, "frame_count": 1, "exposure_time_s": 4.0,
                  "exposed_area_um2": 900}),
]
GALLIUM = {"ion_species": "Ga", "accelerating_voltage_kV": 30}
CAP_DEPOSITION = {**GALLIUM, "beam": "ion", "beam_current_nA": 0.3,
                  "cap_material": "platinum", "cap_thickness_um": 1.5}
THINNING = {**GALLIUM, "beam_current_nA": 0.1, "final_polish_voltage_kV": 2,
            "final_thickness_nm": 95}
SHARPENING = {**GALLIUM, "beam_current_nA": 0.09, "needle_count": 1, "apex_diameter_nm": 95}
TKD = {"accelerating_voltage_kV": 30, "beam_current_nA": 1.0, "working_distance_mm": 4.0,
       "sample_tilt_deg": -20, "step_size_nm": 20, "foil_thickness_nm": 95,
       "scan_pixels": 400 * 250, "dwell_time_us": 100, "exposure_time_s": 10.0,
       "exposed_area_um2": 40}
#: cubic micrometres removed from a particle by the trenches and the lift-out of a lamella
#: chunk, and of an atom-probe wedge (two standard trenches remove ~6 000-9 000 um3)
LAMELLA_REMOVED_UM3, WEDGE_REMOVED_UM3, SEGMENT_UM3 = 7400.0, 4100.0, 25.0
#: (particle, day at the FIB, grid post for its lamella, (coupon, post) for each needle);
#: the third needle of each particle goes onto the reserve coupon
FIB_DAYS = (
    (CORRELATIVE[0], "2025-10-27", "post-B",
     ((COUPON, "03"), (COUPON, "04"), (RESERVE_COUPON, "01"))),
    (CORRELATIVE[1], "2025-10-28", "post-C",
     ((COUPON, "06"), (COUPON, "07"), (RESERVE_COUPON, "02"))),
    (ANALOGUE, "2025-10-29", "post-A", ((COUPON, "01"),)),
)
#: the holders the FIB days need, checked out together
FIB_HOLDERS = (MOUNT_01, GRID, COUPON, RESERVE_COUPON)


def register_controls_and_holders(scene: Scene) -> None:
    """The first laboratory registers its controls, mounts, grid, coupons and transfer capsule."""
    when = at_a("2025-10-10 09:00")
    for n, (code, kind, material, description, store, slot, extra) in enumerate(LAB_ITEMS):
        scene.register("curator_a", code, kind, when, material=material,
                       description=description, status="stored", **extra)
        scene.store("curator_a", code, when + minutes(5 * n + 5), store, slot)


def open_in_glovebox(scene: Scene) -> None:
    """The sealed capsule is checked and opened in the nitrogen glovebox, witness alongside."""
    scene.check_out("curator_a", "fib", CAPSULE, at_a("2025-10-14 08:40"), "VPL-STORE", "VPL-GB1")
    for n, code in enumerate((MOUNT_01, MOUNT_02, ANALOGUE)):
        scene.check_out("curator_a", "fib", code, at_a("2025-10-14 08:45") + minutes(n),
                        "VPL-GB1", "VPL-GB1")
    scene.seal("fib", CAPSULE, "seal-checked", CAPSULE_SEAL, at_a("2025-10-14 09:05"), "VPL-GB1")
    scene.seal("fib", CAPSULE, "seal-broken", CAPSULE_SEAL, at_a("2025-10-14 09:10"), "VPL-GB1")
    start, end = at_a("2025-10-14 09:00"), at_a("2025-10-14 11:45")
    for code in (CAPSULE, WITNESS, ANALOGUE, MOUNT_01, MOUNT_02):
        scene.handling("fib", code, "n2-glovebox", start, end, "VPL-GB1", **GLOVEBOX_A,
                       **TOUCHED, controls=[WITNESS])
    for hour, (o2, h2o) in enumerate(((0.4, 0.7), (0.5, 0.8), (0.4, 0.7))):
        scene.atmosphere("fib", "VPL-GB1", start + minutes(60 * hour), o2, h2o)
    witness_fails_once(scene, end)


def witness_fails_once(scene: Scene, session_end: datetime) -> None:
    """Planted: the witness coupon, clean before the opening session, counts high after it."""
    scene.reading("curator_a", WITNESS, "particles-per-mm2", at_a("2025-10-10 09:30"), 1.6, 0.4,
                  "optical count, 20 fields, at registration")
    failed = scene.reading("curator_a", WITNESS, "particles-per-mm2",
                           session_end + minutes(20), 5.9, 0.6, "optical count, 20 fields")
    scene.plant("control-failed", WITNESS, [failed],
                f"{WITNESS} counted 5.9 particles/mm² after the glovebox opening session; "
                f"everything in the glovebox then shared its exposure")


def mounting_plan() -> list[tuple[str, str, str]]:
    """(item, mount, position): five particles and the analogue on mount 01, six on mount 02."""
    first = [p.code for p in PARTICLES[:6] if p.code != SPLIT]
    plan = [(code, MOUNT_01, f"A{n}") for n, code in enumerate(first, 1)]
    plan.append((ANALOGUE, MOUNT_01, "S1"))
    plan += [(p.code, MOUNT_02, f"A{n}") for n, p in enumerate(PARTICLES[6:], 1)]
    return plan


def mount_particles(scene: Scene) -> None:
    """Each particle leaves its well for a position on a mount, the analogue alongside."""
    when = at_a("2025-10-14 09:30")
    for code, mount, position in mounting_plan():
        scene.place("fib", code, mount, when, position)
        scene.step("fib", code, "mounting", when, 4, "VPL-GB1-PC",
                   {"mount_kind": "sem_stub", "adhesive": "carbon_tape", "position": position})
        when += minutes(6)


def split_friable_particle(scene: Scene) -> None:
    """The friable particle is weighed and split into two fragments, which go onto mount 02."""
    when, spec = at_a("2025-10-14 10:45"), SPECS[SPLIT]
    scene.step("fib", SPLIT, "weighing", when, 4, "VPL-GB1-PC",
               {"mass_ug": spec.mass_ug, "mass_uncertainty_ug": 0.3})
    scene.take_out("fib", SPLIT, when + minutes(5))
    split = scene.step("fib", SPLIT, "split", when + minutes(5), 10, "VPL-GB1-PC",
                       {"method": "needle_press", "fragment_count": 2},
                       summary="Split along a fracture into two fragments")
    cut = when + minutes(15)
    for k, share in ((1, 0.6), (2, 0.35)):  # about 5 % was lost as fines
        code = f"{SPLIT}-F{k}"
        scene.register(
            "fib", code, "fragment", cut, material=spec.material, is_pristine=True,
            status="stored", description=f"Fragment {k} of {SPLIT}",
            mass_ug=round(spec.mass_ug * share, 3),
            mass_uncertainty_ug=round(spec.mass_ug * share * 0.1, 3), mass_method="estimated",
            volume_um3=round(spec.volume_um3 * share, -2), volume_method="estimated")
        scene.derive("fib", SPLIT, code, cut, split, round(spec.volume_um3 * share, -2))
        scene.place("fib", code, MOUNT_02, cut + minutes(k), f"B{k}")
    scene.status("fib", SPLIT, "consumed")


def close_glovebox_session(scene: Scene) -> None:
    """Mounts go back into the glovebox racks, the empty capsule into the store."""
    back = at_a("2025-10-14 11:50")
    for n, mount in enumerate((MOUNT_01, MOUNT_02)):
        scene.check_in("fib", "curator_a", mount, back + minutes(15 * n), "VPL-GB1", "VPL-GB1",
                       SLOTS[mount])
    scene.check_in("fib", "curator_a", CAPSULE, back + minutes(30), "VPL-GB1", "VPL-STORE",
                   "N2 cabinet 2, shelf 1 (empty)")


def plant_air_exposure(scene: Scene) -> None:
    """Planted: a pristine particle is re-seated on the open bench, six minutes in room air."""
    scene.check_out("curator_a", "fib", MOUNT_02, at_a("2025-10-16 13:30"), "VPL-GB1", "VPL-LAB")
    exposure = scene.handling(
        "fib", AIR_EXPOSED, "air", at_a("2025-10-16 13:42"), at_a("2025-10-16 13:48"),
        "VPL-LAB", contact_materials=["stainless-steel"], tools=["solvent-cleaned tweezers"],
        note="Came loose from its tab; re-seated on the open bench (21.5 °C, 38 % RH).")
    scene.check_in("fib", "curator_a", MOUNT_02, at_a("2025-10-16 14:00"), "VPL-LAB", "VPL-GB1",
                   SLOTS[MOUNT_02])
    said = f"{AIR_EXPOSED} is registered pristine but spent 6 min in laboratory air"
    scene.plant("pristine-broken", AIR_EXPOSED, [exposure], said)
    scene.plant("exposure-over-limit", AIR_EXPOSED, [exposure],
                "the study allows no air exposure at all")
    scene.plant("missing-control", AIR_EXPOSED, [exposure], "no control was present on the bench")


def xct(scene: Scene) -> None:
    """Non-destructive XCT of three particles on mount 01, voxel size 0.6 um."""
    scene.check_out("curator_a", "xct", MOUNT_01, at_a("2025-10-17 08:30"), "VPL-GB1", "VPL-XCT")
    when = at_a("2025-10-17 09:00")
    for code in XCT_SCANNED:
        scene.step("xct", code, "xct", when, 300, "VPL-XCT-PC", {
            "accelerating_voltage_kV": 80, "tube_power_W": 7, "voxel_size_um": 0.6,
            "projection_count": 2401, "exposure_per_projection_s": 6,
            "scan_time_s": 2401 * 6, "source_filter": "none"})
        scene.status("xct", code, "in-analysis")
        when += minutes(330)
    scene.check_in("xct", "curator_a", MOUNT_01, at_a("2025-10-18 10:00"), "VPL-XCT", "VPL-GB1",
                   SLOTS[MOUNT_01])


def coat(scene: Scene) -> None:
    """Mount 01 gets a thin carbon coat in the cleanroom; the procedural blank sits open nearby."""
    scene.check_out("curator_a", "fib", MOUNT_01, at_a("2025-10-20 08:40"), "VPL-GB1", "VPL-CR")
    start, end = at_a("2025-10-20 09:00"), at_a("2025-10-20 10:40")
    scene.handling("fib", MOUNT_01, "cleanroom", start, end, "VPL-CR", iso_class=5.0,
                   **TOUCHED, controls=[BLANK])
    scene.handling("fib", BLANK, "cleanroom", start, end, "VPL-CR", iso_class=5.0,
                   note="Procedural blank open on bench 2 for the session.")
    readings.record_particle_counts(
        scene.session, actor=scene.people["fib"], location=scene.places["VPL-CR"],
        measured_at=start, counts_per_m3={0.5: 1240.0, 1.0: 290.0, 5.0: 10.0},
        counter="bench-top optical particle counter")
    scene.step("fib", MOUNT_01, "coating", at_a("2025-10-20 09:20"), 40, "VPL-CT-PC",
               {"coating_material": "carbon", "thickness_nm": 5,
                "method": "thread_evaporation"})
    scene.check_in("fib", "curator_a", MOUNT_01, at_a("2025-10-20 10:50"), "VPL-CR", "VPL-GB1",
                   SLOTS[MOUNT_01])


def sem(scene: Scene) -> None:
    """SEM imaging, EDS maps and EBSD of the two correlative particles and the analogue."""
    scene.check_out("curator_a", "fib", MOUNT_01, at_a("2025-10-21 08:30"), "VPL-GB1", "VPL-FIB")
    when = at_a("2025-10-21 09:00")
    for code in ALONGSIDE:
        for technique, duration, details in SEM_SESSIONS:
            scene.step("fib", code, technique, when, duration, "VPL-DB-PC", details)
            when += minutes(duration + 10)
    scene.check_in("fib", "curator_a", MOUNT_01, at_a("2025-10-21 17:30"), "VPL-FIB", "VPL-GB1",
                   SLOTS[MOUNT_01])


def fib(scene: Scene) -> None:
    """Three days at the FIB: a lamella and atom-probe needles from each of three specimens."""
    for n, code in enumerate(FIB_HOLDERS):
        scene.check_out("curator_a", "fib", code, at_a("2025-10-27 07:30") + minutes(10 * n),
                        "VPL-GB1", "VPL-FIB")
    trenches = {code: lift_outs(scene, code, day, grid_post, needles)
                for code, day, grid_post, needles in FIB_DAYS}
    correct_trench(scene, trenches[MISTYPED])
    scene.step("fib", f"{CORRELATIVE[1]}-L1", "tkd", at_a("2025-10-28 17:00"), 45, "VPL-DB-PC",
               TKD)
    for n, code in enumerate(FIB_HOLDERS):
        stored = scene.check_in("fib", "curator_a", code, at_a("2025-10-29 17:30")
                                + minutes(20 * n), "VPL-FIB", "VPL-GB1", SLOTS[code])
        scene.marks[f"stored:{code}"] = stored


def lift_outs(scene: Scene, code: str, day: str, grid_post: str,
              needles: tuple[tuple[str, str], ...]) -> Event:
    """Cap, trenches, a lamella onto the grid and a wedge cut into needles; returns the trench."""
    when = at_a(f"{day} 08:30")
    scene.step("fib", code, "fib-cap-deposition", when, 20, "VPL-DB-PC", CAP_DEPOSITION)
    # The operator typed 65 for 6.5 nA on the first day; the correction follows.
    current = 65.0 if code == MISTYPED else 6.5
    trench = scene.step("fib", code, "fib-trench", when + minutes(25), 75, "VPL-DB-PC",
                        {**GALLIUM, "beam_current_nA": current, "trench_depth_um": 10})
    cut_lamella(scene, code, when + minutes(105), grid_post)
    cut_needles(scene, code, when + minutes(250), needles)
    return trench


def cut_lamella(scene: Scene, code: str, when: datetime, grid_post: str,
                grid: str = GRID) -> Event:
    """Lift a lamella out of `code`, weld it to a grid post and thin it to ~95 nm."""
    liftout = scene.step("fib", code, "fib-liftout", when, 40, "VPL-DB-PC",
                         {**GALLIUM, "beam_current_nA": 0.3, "child_kind": "lamella"},
                         summary=f"Lamella to {grid} {grid_post}")
    cut, lamella = when + minutes(40), f"{code}-L1"
    scene.register("fib", lamella, "lamella", cut, material=scene.items[code].material,
                   status="in-analysis", description=f"FIB lamella lifted out of {code}",
                   volume_um3=196.0, volume_uncertainty_um3=40.0, volume_method="dimensions")
    scene.derive("fib", code, lamella, cut, liftout, LAMELLA_REMOVED_UM3)
    scene.place("fib", lamella, grid, cut, grid_post)
    return scene.step("fib", lamella, "fib-lamella-thinning", cut + minutes(10), 90,
                      "VPL-DB-PC", THINNING)


def cut_needles(scene: Scene, code: str, when: datetime,
                needles: tuple[tuple[str, str], ...]) -> list[Event]:
    """Lift a wedge out of `code`, weld a segment to each coupon post, sharpen each needle."""
    liftout = scene.step("fib", code, "fib-liftout", when, 40, "VPL-DB-PC",
                         {**GALLIUM, "beam_current_nA": 0.3, "child_kind": "wedge"})
    cut, wedge = when + minutes(40), f"{code}-W1"
    scene.register("fib", wedge, "wedge", cut, material=scene.items[code].material,
                   status="in-analysis", description=f"Atom-probe wedge lifted out of {code}",
                   volume_um3=188.0, volume_uncertainty_um3=40.0, volume_method="dimensions")
    scene.derive("fib", code, wedge, cut, liftout, WEDGE_REMOVED_UM3)
    t, sharpened = cut + minutes(10), []
    for k, (coupon, post) in enumerate(needles, 1):
        where = f"{coupon} post {post}"
        mounted = scene.step("fib", wedge, "mounting", t, 15, "VPL-DB-PC",
                             {"mount_kind": "needle_coupon", "position": where},
                             summary=f"Segment {k} welded to {where}")
        needle = f"{code}-N{k}"
        scene.register("fib", needle, "needle", t + minutes(15),
                       material=scene.items[code].material,
                       status="in-analysis", description=f"Atom-probe needle {k} from {wedge}",
                       volume_um3=SEGMENT_UM3, volume_method="dimensions")
        scene.derive("fib", wedge, needle, t + minutes(15), mounted, SEGMENT_UM3)
        scene.place("fib", needle, coupon, t + minutes(15), f"post-{post}")
        sharpened.append(scene.step("fib", needle, "fib-needle-sharpening", t + minutes(20),
                                    25, "VPL-DB-PC", SHARPENING))
        t += minutes(50)
    scene.status("fib", wedge, "consumed")
    return sharpened


def correct_trench(scene: Scene, trench: Event) -> None:
    """The operator corrects the mistyped trench current; both events stay visible."""
    correction = events.correct_event(
        scene.session, actor=scene.people["fib"], original=trench,
        reason="beam current mistyped: 65 nA entered for 6.5 nA",
        details={**trench.details, "beam_current_nA": 6.5})
    scene.corrections.append((trench.id, correction.id))


def read_blank(scene: Scene) -> None:
    """The procedural blank is counted under the microscope after the preparation sessions."""
    scene.reading("curator_a", BLANK, "particles-per-mm2", at_a("2025-10-30 10:00"), 1.8, 0.4,
                  "optical count, 20 fields")
    scene.reading("curator_a", ANALOGUE, "surface-h-at-pct", at_a("2025-10-30 11:00"), 0.9, 0.2,
                  "APT depth profile of a standard needle, first 5 nm")


def plant_unreceived_return(scene: Scene) -> None:
    """Planted: the empty capsule is released to the facility and shipped; no receipt follows."""
    scene.seal("curator_a", CAPSULE, "seal-applied", "VPL-S-21007", at_a("2025-12-01 09:20"),
               "VPL-STORE")
    release = scene.release("curator_a", "facility", CAPSULE, at_a("2025-12-01 10:00"),
                            "VPL-LAB")
    scene.custody("curator_a", CAPSULE, "shipped", at_a("2025-12-01 10:30"), "TRANSIT",
                  to="facility", details={"carrier": CARRIER, "tracking_id": "TWX-9012-1175",
                                          "condition": "sealed, N2 backfill"})
    scene.status("curator_a", CAPSULE, "returned")
    scene.plant("unreceived-transfer", CAPSULE, [release],
                f"{CAPSULE} was released to the facility but no receipt was ever recorded")
