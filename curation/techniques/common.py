"""Fields shared by several techniques: beam settings, exposure and dose, removed volume.

Ranges are from ../shared/REFERENCES.md where it gives them (marked there "from memory");
every other typical range is common practice, no source, and every hard range is an
instrument-class limit chosen wide enough to refuse only typing slips (no source).
"""

from __future__ import annotations

from curation.techniques.spec import POSITIVE, Field, Range

#: ion species of FIB columns: Ga liquid-metal source, plasma (Xe, Ar, O, N), gas field (He, Ne)
FIB_ION_SPECIES = ("Ga", "Xe", "Ar", "O", "N", "He", "Ne")


def accelerating_voltage(typical: Range, hard_max_kV: float, required: bool = True) -> Field:
    """The beam's accelerating voltage in kV."""
    return Field("accelerating_voltage_kV", "Accelerating voltage", unit="kV",
                 hard=Range(0, hard_max_kV, low_open=True), typical=typical, required=required,
                 help="Accepts other units, e.g. '500 V'.")


def beam_current(typical: Range | None, required: bool = True) -> Field:
    """The probe (or milling) current in nA, the first term of the dose."""
    return Field("beam_current_nA", "Beam current", unit="nA",
                 hard=Range(0, 100_000, low_open=True), typical=typical, required=required,
                 help="Probe current on the sample; '500 pA' is converted to 0.5 nA.")


#: REFERENCES.md: SEM working distance 2–30 mm (from memory)
WORKING_DISTANCE_TYPICAL = Range(2, 30)
#: dwell 50 ns–100 µs: common practice, no source
DWELL_TYPICAL = Range(0.05, 100)


def working_distance(typical: Range = WORKING_DISTANCE_TYPICAL) -> Field:
    """Working distance in mm."""
    return Field("working_distance_mm", "Working distance", unit="mm",
                 hard=Range(0, 100, low_open=True), typical=typical)


def exposure_fields(dwell_typical: Range | None = DWELL_TYPICAL) -> tuple[Field, ...]:
    """Beam-on time (directly, or pixels × dwell × frames) and the exposed area."""
    return (
        Field("exposure_time_s", "Beam-on time", unit="s", hard=POSITIVE,
              help="Total beam-on time over the exposed area; wins over pixels × dwell × frames."),
        Field("scan_pixels", "Pixels per frame", kind="integer", hard=Range(1, 1e12),
              help="Width × height of the scan, e.g. 1024 × 768 = 786432."),
        Field("dwell_time_us", "Dwell time per pixel", unit="us", hard=Range(0, 1e8, low_open=True),
              typical=dwell_typical),
        Field("frame_count", "Frames", kind="integer", hard=Range(1, 1e7),
              help="Frames summed or drift-corrected; 1 when empty."),
        Field("exposed_area_um2", "Exposed area", unit="um**2", hard=POSITIVE,
              help="Scanned field (width × height) or illuminated area; accepts 'nm**2', 'mm**2'."),
    )


def electron_dose_fields() -> tuple[Field, ...]:
    """Dose as the instrument reports it; wins over the dose computed from the beam."""
    return (
        Field("electron_dose_e_per_A2", "Reported electron dose", unit="e/angstrom**2",
              hard=Range(0, 1e12), help="Only when the instrument reports it; 'C/cm**2' accepted."),
        Field("dose_rate_e_per_A2_s", "Reported dose rate", unit="e/angstrom**2/s",
              hard=Range(0, 1e12)),
    )


def electron_beam_fields(voltage: Field, current: Field, *extra: Field) -> tuple[Field, ...]:
    """Voltage, current, the technique's own fields, exposure and reported dose."""
    return (voltage, current, *extra, *exposure_fields(), *electron_dose_fields())


def ion_species(required: bool = True, required_when: tuple[str, tuple[str, ...]] | None = None,
                choices: tuple[str, ...] = FIB_ION_SPECIES) -> Field:
    """The ion species; a fixed set for FIB columns, free text for irradiation facilities."""
    return Field("ion_species", "Ion species", kind="choice" if choices else "text",
                 choices=choices, required=required, required_when=required_when,
                 help="Element symbol of the beam's ions.")


def charge_state() -> Field:
    """Charge state q of the ions (1 for Ga⁺); the fluence divides by it."""
    return Field("charge_state", "Charge state", kind="integer", hard=Range(1, 92),
                 typical=Range(1, 2), default=1, help="q in ions = I·t / (q·e).")


def ion_fluence_reported() -> Field:
    """Ion fluence as the instrument or facility reports it."""
    return Field("ion_fluence_ions_per_cm2", "Reported ion fluence", unit="ion/cm**2",
                 hard=Range(0, 1e22), help="Only when reported; wins over the computed fluence.")


def removed_volume() -> Field:
    """Volume milled away, for the mass budget."""
    return Field("removed_volume_um3", "Removed volume", unit="um**3", hard=Range(0, 1e12),
                 help="Two standard trenches remove ~6 000–9 000 µm³.")


def ion_beam_fields(voltage: Field, current: Field, *extra: Field,
                    species: Field | None = None) -> tuple[Field, ...]:
    """Species, charge, voltage, current, the technique's own fields, exposure and fluence."""
    return (species or ion_species(), charge_state(), voltage, current, *extra,
            *exposure_fields(), ion_fluence_reported())
