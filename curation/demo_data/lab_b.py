"""The second laboratory: shipment in, unpacking under nitrogen, TEM/STEM-EELS, atom probe."""

from __future__ import annotations

from typing import Any

from curation.demo_data.scene import Scene, minutes
from curation.demo_data.setting import (
    ANALOGUE,
    CARRIER,
    CORRELATIVE,
    COUPON,
    GRID,
    RESERVE_COUPON,
    STRAY_NEEDLE,
    VACUUM_CAPSULE,
    VACUUM_CAPSULE_SEAL,
    WITNESS,
    at_a,
    at_b,
)

GLOVEBOX_A = {"o2_ppm": 0.5, "h2o_ppm": 0.8}
GLOVEBOX_B = {"o2_ppm": 0.9, "h2o_ppm": 1.4}
#: what travels in the vacuum transfer capsule, and where each goes on arrival
UNPACKED = (
    (GRID, "SBN-STORE", "N2 cabinet B, drawer 4"),
    (COUPON, "SBN-STORE", "vacuum desiccator 2"),
    (WITNESS, "SBN-GB", "witness holder"),
)
SLOTS = {code: slot for code, _, slot in UNPACKED}

# Electron doses stay under the study's 100 e-/A2: imaging at 1 e-/A2/s for 30 s, and an
# EELS map of 48 x 48 pixels, 100 us dwell, 20 frames over 0.23 um2 at 20 pA (~25 e-/A2).
TEM_SESSIONS: dict[str, tuple[int, dict[str, Any]]] = {
    "tem-imaging": (40, {"accelerating_voltage_kV": 200, "imaging_mode": "bright_field",
                         "beam_current_nA": 0.064, "exposure_time_s": 30,
                         "exposed_area_um2": 4.0, "specimen_temperature_K": 295}),
    "stem-eels": (90, {"accelerating_voltage_kV": 200, "beam_current_nA": 0.02,
                       "convergence_semiangle_mrad": 25, "collection_semiangle_mrad": 50,
                       "energy_dispersion_eV_per_channel": 0.25, "energy_offset_eV": 480,
                       "scan_pixels": 48 * 48, "dwell_time_us": 100, "frame_count": 20,
                       "exposure_time_s": 4.608, "exposed_area_um2": 0.2304,
                       "specimen_temperature_K": 295}),
}
TEM_PLAN = (
    (f"{CORRELATIVE[0]}-L1", ("tem-imaging", "stem-eels")),
    (f"{CORRELATIVE[1]}-L1", ("tem-imaging", "stem-eels")),
    (f"{ANALOGUE}-L1", ("tem-imaging",)),
)
APT_SETTINGS = {"pulse_mode": "laser", "laser_wavelength_nm": 355, "laser_pulse_energy_pJ": 30,
                "pulse_frequency_kHz": 200, "base_temperature_K": 50,
                "detection_rate_percent": 0.5}
#: (needle, start, minutes, ions collected, final voltage kV, outcome); the analogue first
APT_RUNS = (
    (f"{ANALOGUE}-N1", "2025-11-12 09:00", 180, 18_200_000, 6.1, "completed"),
    (f"{CORRELATIVE[0]}-N1", "2025-11-12 13:00", 270, 31_500_000, 7.4, "completed"),
    (f"{CORRELATIVE[0]}-N2", "2025-11-13 09:00", 95, 6_400_000, 4.2, "specimen_fractured"),
    (f"{CORRELATIVE[1]}-N1", "2025-11-13 13:00", 260, 27_900_000, 7.0, "completed"),
    (f"{CORRELATIVE[1]}-N2", "2025-11-14 09:00", 240, 22_300_000, 6.6, "completed"),
)


def ship_to_lab_b(scene: Scene) -> None:
    """Grid, coupon and witness coupon are sealed into the vacuum capsule and sent on."""
    scene.handling("curator_a", VACUUM_CAPSULE, "n2-glovebox", at_a("2025-11-03 08:20"),
                   at_a("2025-11-03 08:50"), "VPL-GB1", **GLOVEBOX_A)
    scene.atmosphere("curator_a", "VPL-GB1", at_a("2025-11-03 08:20"), **GLOVEBOX_A)
    for n, (code, _, _) in enumerate(UNPACKED):
        scene.place("curator_a", code, VACUUM_CAPSULE, at_a("2025-11-03 08:30") + minutes(3 * n),
                    f"bay-{n + 1}")
    scene.seal("curator_a", VACUUM_CAPSULE, "seal-applied", VACUUM_CAPSULE_SEAL,
               at_a("2025-11-03 08:55"), "VPL-GB1")
    tracking = {"carrier": CARRIER, "tracking_id": "TWX-7730-4418"}
    scene.release("curator_a", "curator_b", VACUUM_CAPSULE, at_a("2025-11-03 09:30"), "VPL-LAB")
    scene.custody("curator_a", VACUUM_CAPSULE, "shipped", at_a("2025-11-03 10:00"), "TRANSIT",
                  to="curator_b",
                  details={**tracking, "condition": "sealed under vacuum, 3e-6 mbar"})
    scene.custody("curator_b", VACUUM_CAPSULE, "delivered", at_b("2025-11-05 16:40"), "SBN-LAB",
                  details={**tracking, "condition": "case intact; capsule gauge 4e-6 mbar"})
    scene.receive("curator_b", "curator_a", VACUUM_CAPSULE, at_b("2025-11-05 16:50"), "SBN-LAB")
    scene.seal("curator_b", VACUUM_CAPSULE, "seal-checked", VACUUM_CAPSULE_SEAL,
               at_b("2025-11-05 17:00"), "SBN-LAB")


def unpack(scene: Scene) -> None:
    """The capsule is opened in the nitrogen glovebox and its holders put away."""
    start = at_b("2025-11-06 09:00")
    scene.handling("curator_b", VACUUM_CAPSULE, "n2-glovebox", start, start + minutes(40),
                   "SBN-GB", **GLOVEBOX_B, controls=[WITNESS])
    scene.atmosphere("curator_b", "SBN-GB", start, **GLOVEBOX_B)
    scene.seal("curator_b", VACUUM_CAPSULE, "seal-broken", VACUUM_CAPSULE_SEAL,
               start + minutes(5), "SBN-GB")
    for n, (code, store, slot) in enumerate(UNPACKED):
        scene.take_out("curator_b", code, start + minutes(20 + n))
        scene.store("curator_b", code, start + minutes(50 + n), store, slot)
    scene.store("curator_b", VACUUM_CAPSULE, start + minutes(60), "SBN-STORE", "shelf 3")
    scene.reading("curator_b", WITNESS, "particles-per-mm2", start + minutes(90), 2.6, 0.5,
                  "optical count, 20 fields")


def tem(scene: Scene) -> None:
    """TEM imaging and STEM-EELS of the lamellae; the analogue's lamella is imaged too."""
    scene.check_out("curator_b", "tem", GRID, at_b("2025-11-10 08:40"), "SBN-STORE", "SBN-TEM")
    when = at_b("2025-11-10 09:00")
    for lamella, techniques in TEM_PLAN:
        for technique in techniques:
            duration, details = TEM_SESSIONS[technique]
            scene.step("tem", lamella, technique, when, duration, "SBN-TEM-PC", details)
            when += minutes(duration + 15)
        scene.status("tem", lamella, "stored")
    scene.check_in("tem", "curator_b", GRID, at_b("2025-11-10 18:00"), "SBN-TEM", "SBN-STORE",
                   SLOTS[GRID])


def apt(scene: Scene) -> None:
    """Laser-pulsed atom probe runs on five needles; each run uses the needle up."""
    scene.check_out("curator_b", "apt", COUPON, at_b("2025-11-12 08:30"), "SBN-STORE", "SBN-APT")
    for needle, start, duration, ions, final_kV, outcome in APT_RUNS:
        scene.step("apt", needle, "apt", at_b(start), duration, "SBN-APT-PC",
                   {**APT_SETTINGS, "ions_collected": ions, "final_voltage_kV": final_kV,
                    "outcome": outcome})
        scene.status("apt", needle, "consumed")
    scene.check_in("apt", "curator_b", COUPON, at_b("2025-11-14 14:00"), "SBN-APT", "SBN-STORE",
                   SLOTS[COUPON])


def plant_step_away_from_custody(scene: Scene) -> None:
    """Planted: a spare needle is logged at the atom probe while its coupon is stored in the
    first laboratory (a label scanned from the wrong list)."""
    run = scene.step("apt", STRAY_NEEDLE, "apt", at_b("2025-11-20 10:00"), 200, "SBN-APT-PC",
                     {**APT_SETTINGS, "ions_collected": 19_700_000, "final_voltage_kV": 6.2,
                      "outcome": "completed"})
    stored = scene.marks[f"stored:{RESERVE_COUPON}"]
    scene.plant("location-conflict", STRAY_NEEDLE, [stored, run],
                f"{STRAY_NEEDLE} was logged at the atom probe while custody has its coupon "
                f"{RESERVE_COUPON} stored at the first laboratory")
