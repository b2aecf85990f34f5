"""Electron dose, dose rate, ion fluence and X-ray time against CODATA and pint worked examples."""

from __future__ import annotations

import math

import pint
import pytest
from scipy import constants

from curation.techniques import (
    ELEMENTARY_CHARGE_C,
    dose_for,
    dose_rate_e_per_A2_s,
    electron_dose_e_per_A2,
    ion_fluence_ions_per_cm2,
    validate,
)

#: an independent pint registry: the reference for unit algebra
REF: pint.UnitRegistry[float] = pint.UnitRegistry(cache_folder=None)
#: the CODATA elementary charge as scipy gives it
E_CODATA = REF.Quantity(constants.e, "C")


def reference_dose(current: pint.Quantity, time: pint.Quantity, area: pint.Quantity) -> float:
    """I·t / (e·A) in e⁻/Å², computed in the test with pint and scipy's e (Egerton's formula)."""
    return (current * time / (E_CODATA * area)).to("1/angstrom**2").magnitude


def test_elementary_charge_is_codata() -> None:
    # scipy.constants (CODATA 2018+): e is exact in the SI since 2019
    assert constants.e == ELEMENTARY_CHARGE_C
    assert constants.physical_constants["elementary charge"][0] == ELEMENTARY_CHARGE_C
    assert constants.physical_constants["elementary charge"][2] == 0.0  # exact: no uncertainty


def test_one_nanoampere_second_over_one_square_micrometre() -> None:
    # REFERENCES.md worked example: 1 nA for 1 s over 1 µm² = 62.4150907446076… e⁻/Å²
    assert electron_dose_e_per_A2(1.0, 1.0, 1.0) == pytest.approx(62.4150907446076, rel=1e-12)
    # the same from scipy's CODATA e: 1e-9 C / (e × 1e8 Å²)
    assert electron_dose_e_per_A2(1.0, 1.0, 1.0) == pytest.approx(
        1e-9 / (constants.e * 1e8), rel=1e-12)


def test_one_minute_at_one_nanoampere() -> None:
    # REFERENCES.md: 1 nA over a 1 µm² field for 60 s ≈ 3.7 × 10³ e⁻/Å²
    assert electron_dose_e_per_A2(1.0, 60.0, 1.0) == pytest.approx(3.7e3, rel=0.02)
    assert electron_dose_e_per_A2(1.0, 60.0, 1.0) == pytest.approx(
        reference_dose(REF.Quantity(1, "nA"), REF.Quantity(60, "s"), REF.Quantity(1, "um**2")),
        rel=1e-12)


def test_dose_units_agree_with_pint() -> None:
    # REFERENCES.md and pint unit algebra: 1 e⁻/Å² = 100 e⁻/nm² = 1.602176634e-3 C/cm²
    one = REF.Quantity(1, "elementary_charge / angstrom**2")
    assert one.to("elementary_charge / nm**2").magnitude == pytest.approx(100, rel=1e-12)
    assert one.to("C / cm**2").magnitude == pytest.approx(1.602176634e-3, rel=1e-12)
    # the same identity through our dose: 1 e⁻/Å² is a charge density of 1.602176634e-3 C/cm²,
    # so a current density of 1.602176634e-3 A/cm² for 1 s over 1 µm² gives 1 e⁻/Å²
    current_nA = REF.Quantity(1.602176634e-3, "A/cm**2").to("nA/um**2").magnitude
    assert electron_dose_e_per_A2(current_nA, 1.0, 1.0) == pytest.approx(1.0, rel=1e-12)


def test_scanned_beam_dose_is_pixels_times_dwell_times_frames() -> None:
    current, pixels, dwell, frames, area = 0.05, 1024 * 768, 2.0, 8, 0.8 * 0.6
    # reference: Egerton's formula with t = pixels × dwell × frames, all in pint quantities
    expected = reference_dose(REF.Quantity(current, "nA"),
                              pixels * REF.Quantity(dwell, "us") * frames,
                              REF.Quantity(area, "um**2"))
    params = {"beam_current_nA": current, "scan_pixels": pixels, "dwell_time_us": dwell,
              "frame_count": frames, "exposed_area_um2": area}
    dose = dose_for("stem-eels", params)
    assert dose is not None and not dose.is_reported
    assert dose.electron_dose_e_per_A2 == pytest.approx(expected, rel=1e-12)
    assert dose.beam_time_s == pytest.approx(pixels * dwell * 1e-6 * frames, rel=1e-12)


def test_direct_time_wins_over_the_scan() -> None:
    params = {"beam_current_nA": 1.0, "scan_pixels": 100, "dwell_time_us": 1.0,
              "exposure_time_s": 1.0, "exposed_area_um2": 1.0}
    dose = dose_for("sem-imaging", params)
    # REFERENCES.md worked example: 1 nA, 1 s, 1 µm² = 62.4150907446076 e⁻/Å²
    assert dose is not None
    assert dose.electron_dose_e_per_A2 == pytest.approx(62.4150907446076, rel=1e-12)


def test_dose_rate_is_dose_per_second() -> None:
    rate = dose_rate_e_per_A2_s(0.2, 4.0)
    # reference: I / (e·A) with pint and scipy's e
    expected = (REF.Quantity(0.2, "nA") / (E_CODATA * REF.Quantity(4, "um**2")))
    assert rate == pytest.approx(expected.to("1/angstrom**2/s").magnitude, rel=1e-12)
    assert rate * 30 == pytest.approx(electron_dose_e_per_A2(0.2, 30, 4.0), rel=1e-12)


def test_ion_fluence_singly_and_doubly_charged() -> None:
    # ions = I·t / (q·e) with scipy's CODATA e; area 1 µm² = 1e-8 cm²
    single = ion_fluence_ions_per_cm2(1.0, 1.0, 1.0, charge_state=1)
    double = ion_fluence_ions_per_cm2(1.0, 1.0, 1.0, charge_state=2)
    assert single == pytest.approx(1e-9 / constants.e / 1e-8, rel=1e-12)
    assert double == pytest.approx(1e-9 / (2 * constants.e) / 1e-8, rel=1e-12)
    # a Ga⁺ milling box: 30 pA for 120 s over 10 µm × 5 µm, against pint quantities
    charge = REF.Quantity(30, "pA") * REF.Quantity(120, "s")
    expected = (charge / (E_CODATA * REF.Quantity(50, "um**2"))).to("1/cm**2").magnitude
    assert ion_fluence_ions_per_cm2(0.03, 120, 50) == pytest.approx(expected, rel=1e-12)


def test_charge_state_below_one_is_refused() -> None:
    with pytest.raises(ValueError):
        ion_fluence_ions_per_cm2(1.0, 1.0, 1.0, charge_state=0)


def test_station_input_with_units_gives_the_dose() -> None:
    raw = {"accelerating_voltage_kV": "200 kV", "beam_current_nA": "500 pA",
           "exposure_time_s": "2 min", "exposed_area_um2": "250000 nm^2",
           "convergence_semiangle_mrad": 20}
    dose = dose_for("stem-eels", validate("stem-eels", raw).values)
    expected = reference_dose(REF.Quantity(500, "pA"), REF.Quantity(2, "min"),
                              REF.Quantity(250_000, "nm**2"))
    assert dose is not None and dose.electron_dose_e_per_A2 == pytest.approx(expected, rel=1e-11)


def test_reported_dose_wins_and_is_marked() -> None:
    params = {"beam_current_nA": 1.0, "exposure_time_s": 1.0, "exposed_area_um2": 1.0,
              "electron_dose_e_per_A2": 5.0}
    dose = dose_for("tem-imaging", params)
    assert dose is not None and dose.is_reported
    assert dose.electron_dose_e_per_A2 == 5.0
    # the rate still comes from the beam: I / (e·A)
    assert dose.dose_rate_e_per_A2_s == pytest.approx(dose_rate_e_per_A2_s(1.0, 1.0))


def test_reported_dose_alone_gives_rate_from_time() -> None:
    dose = dose_for("tem-imaging", {"electron_dose_e_per_A2": 40.0, "exposure_time_s": 8.0})
    assert dose is not None and dose.dose_rate_e_per_A2_s == pytest.approx(5.0)


def test_missing_area_leaves_the_dose_unknown() -> None:
    dose = dose_for("sem-imaging", {"beam_current_nA": 1.0, "exposure_time_s": 10.0})
    assert dose is not None
    assert dose.electron_dose_e_per_A2 is None and dose.dose_rate_e_per_A2_s is None


def test_fib_step_gives_ion_fluence_with_charge_state() -> None:
    params = {"beam_current_nA": 1.0, "exposure_time_s": 1.0, "exposed_area_um2": 1.0,
              "charge_state": 2}
    dose = dose_for("fib-trench", params)
    assert dose is not None and dose.electron_dose_e_per_A2 is None
    assert dose.ion_fluence_ions_per_cm2 == pytest.approx(1e-9 / (2 * constants.e) / 1e-8,
                                                          rel=1e-12)


def test_reported_fluence_wins() -> None:
    raw = {"ion_species": "He", "ion_energy_keV": 4, "ion_fluence_ions_per_cm2": "1e17 ions/cm²",
           "beam_current_nA": 1, "exposure_time_s": 1, "exposed_area_um2": 1}
    dose = dose_for("ion-irradiation", validate("ion-irradiation", raw).values)
    assert dose is not None and dose.is_reported
    assert dose.ion_fluence_ions_per_cm2 == 1e17


def test_cap_deposition_dose_follows_the_beam_used() -> None:
    params = {"beam_current_nA": 1.0, "exposure_time_s": 1.0, "exposed_area_um2": 1.0}
    electron = dose_for("fib-cap-deposition", {**params, "beam": "electron"})
    ion = dose_for("fib-cap-deposition", {**params, "beam": "ion"})
    assert electron is not None and ion is not None
    assert electron.electron_dose_e_per_A2 == pytest.approx(62.4150907446076, rel=1e-12)
    assert electron.ion_fluence_ions_per_cm2 is None
    assert ion.electron_dose_e_per_A2 is None and ion.ion_fluence_ions_per_cm2 is not None


def test_xct_counts_xray_seconds() -> None:
    dose = dose_for("xct", {"projection_count": 1601, "exposure_per_projection_s": 2.5})
    assert dose is not None and dose.xray_seconds == pytest.approx(1601 * 2.5)
    direct = dose_for("xct", {"projection_count": 1601, "exposure_per_projection_s": 2.5,
                              "scan_time_s": 5000.0})
    assert direct is not None and direct.xray_seconds == 5000.0
    assert direct.electron_dose_e_per_A2 is None


@pytest.mark.parametrize("code", ["apt", "weighing", "mounting", "coating", "heating", "split"])
def test_no_beam_no_dose(code: str) -> None:
    assert dose_for(code, {}) is None


def test_dose_scales_linearly() -> None:
    base = electron_dose_e_per_A2(0.3, 7.0, 2.0)
    assert electron_dose_e_per_A2(0.6, 7.0, 2.0) == pytest.approx(2 * base, rel=1e-12)
    assert electron_dose_e_per_A2(0.3, 7.0, 4.0) == pytest.approx(base / 2, rel=1e-12)
    assert math.isfinite(base)
