"""Electron-beam techniques: SEM imaging, EDS, EBSD, TKD, TEM and STEM.

Typical ranges from ../shared/REFERENCES.md (from memory) unless marked common practice, no source.
"""

from __future__ import annotations

from curation.techniques.common import (
    accelerating_voltage,
    beam_current,
    electron_beam_fields,
    working_distance,
)
from curation.techniques.spec import Field, Range, Technique

# REFERENCES.md: SEM 0.5–30 kV, 1 pA–100 nA (from memory); 50 kV: instrument class, no source
_SEM_KV = accelerating_voltage(Range(0.5, 30), 50)
_SEM_NA = beam_current(Range(0.001, 100))
# REFERENCES.md: TEM 60–300 kV (from memory); 3 MV covers high-voltage instruments, no source
_TEM_KV = accelerating_voltage(Range(60, 300), 3000)


def _tilt(typical: Range | None) -> Field:
    """Sample tilt from the horizontal, in degrees."""
    return Field("sample_tilt_deg", "Sample tilt", unit="degree", hard=Range(-90, 90),
                 typical=typical, required=True)


def _specimen_temperature() -> Field:
    """Holder temperature; cryo holders slow beam damage of hydrous phases."""
    # 77–300 K (liquid-nitrogen holder to room): common practice, no source
    return Field("specimen_temperature_K", "Specimen temperature", unit="K",
                 hard=Range(0, 2000, low_open=True), typical=Range(77, 300),
                 help="Accepts '°C', e.g. '-170 °C'.")


SEM_IMAGING = Technique(
    code="sem-imaging", family="sem", label="SEM imaging", puts_electron_beam=True,
    fields=electron_beam_fields(
        _SEM_KV, _SEM_NA, working_distance(),
        Field("detector", "Detector", kind="choice", required=True,
              choices=("secondary_electron", "backscattered_electron", "in_column")),
        Field("pixel_size_nm", "Pixel size", unit="nm", hard=Range(0, 1e6, low_open=True)),
    ),
)

EDS = Technique(
    code="eds", family="eds", label="EDS (SEM)", puts_electron_beam=True,
    fields=electron_beam_fields(
        # 5–30 kV, 0.1–20 nA: common practice, no source
        accelerating_voltage(Range(5, 30), 50), beam_current(Range(0.1, 20)), working_distance(),
        Field("acquisition_mode", "Acquisition", kind="choice", required=True,
              choices=("point", "line", "map")),
        Field("live_time_s", "Live time", unit="s", hard=Range(0, 1e7, low_open=True)),
    ),
)

EBSD = Technique(
    code="ebsd", family="ebsd", label="EBSD", puts_electron_beam=True,
    fields=electron_beam_fields(
        # REFERENCES.md: 10–30 kV at ~70° tilt (60–75°), from memory; 1–100 nA: no source
        accelerating_voltage(Range(10, 30), 50), beam_current(Range(1, 100)), working_distance(),
        _tilt(Range(60, 75)),
        # 20 nm–5 µm: common practice, no source
        Field("step_size_um", "Step size", unit="um", hard=Range(0, 1000, low_open=True),
              typical=Range(0.02, 5)),
        Field("indexed_percent", "Points indexed", unit="percent", hard=Range(0, 100)),
    ),
)

TKD = Technique(
    code="tkd", family="tkd", label="TKD (transmission Kikuchi diffraction)",
    puts_electron_beam=True,
    fields=electron_beam_fields(
        # REFERENCES.md: 20–30 kV on ~50–150 nm foils (from memory); 0.5–20 nA: no source
        accelerating_voltage(Range(20, 30), 50), beam_current(Range(0.5, 20)), working_distance(),
        Field("foil_thickness_nm", "Foil thickness", unit="nm",
              hard=Range(0, 10_000, low_open=True), typical=Range(50, 150)),
        _tilt(None),
        # 2–50 nm: common practice, no source
        Field("step_size_nm", "Step size", unit="nm", hard=Range(0, 1e6, low_open=True),
              typical=Range(2, 50)),
    ),
)

TEM_IMAGING = Technique(
    code="tem-imaging", family="tem", label="TEM imaging", puts_electron_beam=True,
    fields=electron_beam_fields(
        _TEM_KV, beam_current(None, required=False),
        Field("imaging_mode", "Mode", kind="choice", required=True,
              choices=("bright_field", "dark_field", "high_resolution", "energy_filtered")),
        _specimen_temperature(),
    ),
)

TEM_DIFFRACTION = Technique(
    code="tem-diffraction", family="tem", label="TEM diffraction", puts_electron_beam=True,
    fields=electron_beam_fields(
        _TEM_KV, beam_current(None, required=False),
        Field("diffraction_mode", "Mode", kind="choice", required=True,
              choices=("selected_area", "nanobeam", "convergent_beam", "precession")),
        # 50 mm–3 m: common practice, no source
        Field("camera_length_mm", "Camera length", unit="mm", hard=Range(0, 1e5, low_open=True),
              typical=Range(50, 3000)),
        _specimen_temperature(),
    ),
)

STEM_EELS = Technique(
    code="stem-eels", family="stem", label="STEM EELS", puts_electron_beam=True,
    fields=electron_beam_fields(
        # 5 pA–1 nA probes; semi-angles 5–40 / 5–100 mrad; 5 meV–1 eV per channel: no source
        _TEM_KV, beam_current(Range(0.005, 1)),
        Field("convergence_semiangle_mrad", "Convergence semi-angle", unit="mrad",
              hard=Range(0, 200, low_open=True), typical=Range(5, 40)),
        Field("collection_semiangle_mrad", "Collection semi-angle", unit="mrad",
              hard=Range(0, 500, low_open=True), typical=Range(5, 100)),
        Field("energy_dispersion_eV_per_channel", "Dispersion per channel", unit="eV",
              hard=Range(0, 10, low_open=True), typical=Range(0.005, 1)),
        Field("energy_offset_eV", "Energy offset", unit="eV", hard=Range(-1000, 1e5)),
        _specimen_temperature(),
    ),
)

STEM_EDS = Technique(
    code="stem-eds", family="stem", label="STEM EDS", puts_electron_beam=True,
    fields=electron_beam_fields(
        # 10 pA–2 nA: common practice, no source
        _TEM_KV, beam_current(Range(0.01, 2)),
        Field("live_time_s", "Live time", unit="s", hard=Range(0, 1e7, low_open=True)),
        _specimen_temperature(),
    ),
)

TECHNIQUES = (SEM_IMAGING, EDS, EBSD, TKD, TEM_IMAGING, TEM_DIFFRACTION, STEM_EELS, STEM_EDS)
