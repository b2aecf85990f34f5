"""FIB-SEM steps: trench, lift-out, lamella thinning, needle sharpening, protective cap.

Typical ranges from ../shared/REFERENCES.md "FIB preparation" (common practice, from memory)
unless marked common practice, no source.
"""

from __future__ import annotations

from curation.techniques.common import (
    accelerating_voltage,
    beam_current,
    electron_dose_fields,
    ion_beam_fields,
    ion_species,
    removed_volume,
)
from curation.techniques.spec import Field, Range, Technique

_FIB_KV_MAX = 50  # instrument class, no source
# REFERENCES.md: trenching at 30 kV, final polish at 2–5 kV and tens of pA (from memory)
_MILLING_KV = accelerating_voltage(Range(2, 30), _FIB_KV_MAX)
_POLISH_NA = beam_current(Range(0.01, 1))



def _final_polish() -> tuple[Field, ...]:
    """The low-kV clean-up that thins the amorphous damage layer (~23 nm at 30 kV)."""
    # REFERENCES.md: final polish at 2–5 kV and tens of pA (from memory)
    return (
        Field("final_polish_voltage_kV", "Final polish voltage", unit="kV",
              hard=Range(0, _FIB_KV_MAX, low_open=True), typical=Range(2, 5)),
        Field("final_polish_beam_current_nA", "Final polish current", unit="nA",
              hard=Range(0, 100_000, low_open=True), typical=Range(0.01, 0.1)),
    )


FIB_TRENCH = Technique(
    code="fib-trench", family="fib", label="FIB trench milling", is_destructive=True,
    puts_ion_beam=True,
    fields=ion_beam_fields(
        # 16–30 kV, 0.5–65 nA for bulk trenches: common practice, no source
        accelerating_voltage(Range(16, 30), _FIB_KV_MAX), beam_current(Range(0.5, 65)),
        Field("trench_depth_um", "Trench depth", unit="um", hard=Range(0, 1000, low_open=True)),
        removed_volume(),
    ),
)

FIB_LIFTOUT = Technique(
    code="fib-liftout", family="fib", label="FIB lift-out", is_destructive=True,
    puts_ion_beam=True, creates=("lamella", "wedge"),
    help="Cuts a lamella or a wedge free and attaches it to a grid post or needle coupon.",
    fields=ion_beam_fields(
        _MILLING_KV, beam_current(Range(0.05, 10)),
        Field("child_kind", "Lifted out", kind="choice", choices=("lamella", "wedge"),
              required=True),
        removed_volume(),
    ),
)

FIB_LAMELLA_THINNING = Technique(
    code="fib-lamella-thinning", family="fib", label="FIB lamella thinning", is_destructive=True,
    puts_ion_beam=True,
    fields=ion_beam_fields(
        _MILLING_KV, _POLISH_NA,
        # REFERENCES.md: lamella ~100 nm thick (50–150), from memory
        Field("final_thickness_nm", "Final thickness", unit="nm",
              hard=Range(0, 10_000, low_open=True), typical=Range(50, 150), required=True),
        *_final_polish(),
        removed_volume(),
    ),
)

FIB_NEEDLE_SHARPENING = Technique(
    code="fib-needle-sharpening", family="fib", label="FIB needle sharpening (annular milling)",
    is_destructive=True, puts_ion_beam=True, creates=("needle",),
    help="Sharpens wedge pieces on the posts of a coupon into atom-probe needles.",
    fields=ion_beam_fields(
        _MILLING_KV, _POLISH_NA,
        Field("needle_count", "Needles made", kind="integer", hard=Range(1, 100),
              required=True),
        # REFERENCES.md: APT needle apex ~100 nm diameter (from memory); 50–150 nm: no source
        Field("apex_diameter_nm", "Apex diameter", unit="nm",
              hard=Range(0, 10_000, low_open=True), typical=Range(50, 150)),
        *_final_polish(),
        removed_volume(),
    ),
)

FIB_CAP_DEPOSITION = Technique(
    code="fib-cap-deposition", family="fib", label="Protective cap deposition",
    puts_electron_beam=True, puts_ion_beam=True,
    help="Log the electron-beam and the ion-beam layers as two steps: each has its own dose.",
    fields=(
        Field("beam", "Deposited with", kind="choice", choices=("electron", "ion"),
              required=True),
        Field("cap_material", "Cap material", kind="choice", required=True,
              choices=("platinum", "tungsten", "carbon", "chromium", "gold")),
        # 0.2–3 µm: common practice, no source
        Field("cap_thickness_um", "Cap thickness", unit="um", hard=Range(0, 100, low_open=True),
              typical=Range(0.2, 3)),
        *ion_beam_fields(
            accelerating_voltage(Range(2, 30), _FIB_KV_MAX), beam_current(Range(0.001, 10)),
            species=ion_species(required=False, required_when=("beam", ("ion",))),
        ),
        *electron_dose_fields(),
    ),
)

TECHNIQUES = (FIB_TRENCH, FIB_LIFTOUT, FIB_LAMELLA_THINNING, FIB_NEEDLE_SHARPENING,
              FIB_CAP_DEPOSITION)
