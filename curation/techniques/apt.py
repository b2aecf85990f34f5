"""Atom probe tomography, laser or voltage pulsed; field names after NeXus NXapm.

Typical ranges from ../shared/REFERENCES.md (from memory) unless marked common practice, no source.
"""

from __future__ import annotations

from curation.techniques.spec import Field, Range, Technique

_LASER = ("laser", "laser_and_voltage")
_VOLTAGE = ("voltage", "laser_and_voltage")

APT = Technique(
    code="apt", family="apt", label="Atom probe tomography", is_destructive=True,
    help="Field evaporation consumes the needle; no electron, ion or X-ray beam.",
    fields=(
        # NXapm pulse_mode vocabulary
        Field("pulse_mode", "Pulse mode", kind="choice", choices=("laser", "voltage",
              "laser_and_voltage"), required=True),
        # REFERENCES.md: 10–1 000 kHz
        Field("pulse_frequency_kHz", "Pulse frequency", unit="kHz",
              hard=Range(0, 10_000, low_open=True), typical=Range(10, 1000), required=True),
        # REFERENCES.md: laser 355 or 257.5 nm
        Field("laser_wavelength_nm", "Laser wavelength", unit="nm",
              hard=Range(0, 2000, low_open=True), typical=Range(257.5, 355),
              required_when=("pulse_mode", _LASER)),
        # REFERENCES.md: 1–1 000 pJ, 10–50 pJ typical on minerals
        Field("laser_pulse_energy_pJ", "Laser pulse energy", unit="pJ",
              hard=Range(0, 1e6, low_open=True), typical=Range(1, 1000),
              required_when=("pulse_mode", _LASER),
              help="10–50 pJ is usual on minerals."),
        # NXapm pulse_fraction; 10–25 %: common practice, no source
        Field("pulse_fraction_percent", "Pulse fraction", unit="percent",
              hard=Range(0, 100, low_open=True), typical=Range(10, 25),
              required_when=("pulse_mode", _VOLTAGE)),
        # REFERENCES.md: base temperature 20–80 K
        Field("base_temperature_K", "Base temperature", unit="K",
              hard=Range(0, 400, low_open=True), typical=Range(20, 80), required=True),
        # REFERENCES.md: detection rate 0.1–5 %
        Field("detection_rate_percent", "Detection rate", unit="percent",
              hard=Range(0, 100, low_open=True), typical=Range(0.1, 5), required=True,
              help="Ions detected per 100 pulses."),
        # REFERENCES.md: 1–500 million ions
        Field("ions_collected", "Ions collected", kind="integer", hard=Range(0, 1e12),
              typical=Range(1e6, 5e8)),
        # 2–15 kV at the end of a run: common practice, no source
        Field("final_voltage_kV", "Final specimen voltage", unit="kV",
              hard=Range(0, 30, low_open=True), typical=Range(2, 15)),
        Field("outcome", "Outcome", kind="choice",
              choices=("completed", "specimen_fractured", "stopped")),
    ),
)

TECHNIQUES = (APT,)
