"""X-ray computed tomography, lab source and synchrotron.

Typical ranges from ../shared/REFERENCES.md (from memory) unless marked common practice, no source.
"""

from __future__ import annotations

from curation.techniques.spec import POSITIVE, Field, Range, Technique

# REFERENCES.md: voxel 0.03–30 µm, 1 000–4 000 projections (from memory)
_VOXEL = Field("voxel_size_um", "Voxel size", unit="um", hard=Range(0, 1000, low_open=True),
               typical=Range(0.03, 30), required=True)
_PROJECTIONS = Field("projection_count", "Projections", kind="integer", hard=Range(1, 1e6),
                     typical=Range(1000, 4000), required=True)
_SCAN_TIME = Field("scan_time_s", "Total X-ray time", unit="s", hard=POSITIVE,
                   help="Beam-on time of the whole scan; wins over projections × exposure.")
_HOLDER_ATMOSPHERE = Field("holder_atmosphere", "Holder atmosphere", kind="choice",
                           choices=("air", "nitrogen", "argon", "vacuum"))
_VOXEL_COUNT = Field("voxel_count", "Voxels in the particle", kind="integer", hard=Range(0, 1e13),
                     help="Segmented particle voxels: volume = count × voxel size³.")


def _exposure(typical: Range) -> Field:
    """Exposure per projection."""
    return Field("exposure_per_projection_s", "Exposure per projection", unit="s",
                 hard=Range(0, 3600, low_open=True), typical=typical)


XCT = Technique(
    code="xct", family="xct", label="X-ray CT (lab source)", puts_xrays=True,
    fields=(
        # REFERENCES.md: 20–160 kV lab source (from memory); 600 kV: instrument class, no source
        Field("accelerating_voltage_kV", "Tube voltage", unit="kV",
              hard=Range(0, 600, low_open=True), typical=Range(20, 160), required=True),
        Field("tube_power_W", "Tube power", unit="W", hard=Range(0, 10_000, low_open=True)),
        _VOXEL, _PROJECTIONS,
        # 0.1–60 s per projection: common practice, no source
        _exposure(Range(0.1, 60)), _SCAN_TIME,
        Field("source_filter", "Source filter", kind="text", help="e.g. 'none', '0.5 mm Al'."),
        _HOLDER_ATMOSPHERE, _VOXEL_COUNT,
    ),
)

XCT_SYNCHROTRON = Technique(
    code="xct-synchrotron", family="xct", label="X-ray CT (synchrotron)", puts_xrays=True,
    fields=(
        Field("facility_beamline", "Facility and beamline", kind="text", required=True),
        Field("beam_mode", "Beam", kind="choice", choices=("monochromatic", "pink", "white"),
              required=True),
        # 5–100 keV: common practice, no source
        Field("photon_energy_keV", "Photon energy", unit="keV",
              hard=Range(0, 1000, low_open=True), typical=Range(5, 100)),
        _VOXEL, _PROJECTIONS,
        # 1 ms–10 s per projection: common practice, no source
        _exposure(Range(0.001, 10)), _SCAN_TIME, _HOLDER_ATMOSPHERE, _VOXEL_COUNT,
    ),
)

TECHNIQUES = (XCT, XCT_SYNCHROTRON)
