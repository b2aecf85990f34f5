"""Preparation steps that change a sample: coating, ion irradiation, heating, split, mounting,
weighing. Ranges are common practice, no source, unless marked.
"""

from __future__ import annotations

from curation.techniques.common import (
    beam_current,
    charge_state,
    exposure_fields,
    ion_fluence_reported,
    ion_species,
)
from curation.techniques.spec import POSITIVE, Field, Range, Technique

COATING = Technique(
    code="coating", family="preparation", label="Conductive coating",
    fields=(
        Field("coating_material", "Material", kind="choice", required=True,
              choices=("carbon", "gold", "gold_palladium", "platinum", "iridium", "osmium",
                       "chromium")),
        Field("thickness_nm", "Thickness", unit="nm", hard=Range(0, 10_000, low_open=True),
              typical=Range(2, 30), required=True),
        Field("method", "Method", kind="choice",
              choices=("sputter", "thread_evaporation", "rod_evaporation", "thermal_evaporation")),
        Field("pressure_Pa", "Chamber pressure", unit="Pa", hard=Range(0, 2e5),
              help="Accepts 'mbar' and 'torr'."),
    ),
)

ION_IRRADIATION = Technique(
    code="ion-irradiation", family="preparation", label="Ion irradiation",
    # irreversible: it makes a space-weathered rim on an analogue standard
    is_destructive=True, puts_ion_beam=True,
    help="Space-weathering simulation on analogue standards.",
    fields=(
        ion_species(choices=()), charge_state(),
        # 1–100 keV spans solar-wind-like H and He (about 1 keV per nucleon) up to implanters
        Field("ion_energy_keV", "Ion energy", unit="keV", hard=Range(0, 1e6, low_open=True),
              typical=Range(1, 100), required=True),
        beam_current(None, required=False),
        *exposure_fields(dwell_typical=None),
        ion_fluence_reported(),
        Field("sample_temperature_K", "Sample temperature", unit="K",
              hard=Range(0, 3000, low_open=True)),
    ),
)

HEATING = Technique(
    code="heating", family="preparation", label="Heating",
    # irreversible: dehydration and annealing change what later analyses see
    is_destructive=True,
    fields=(
        Field("temperature_K", "Temperature", unit="K", hard=Range(0, 4000, low_open=True),
              typical=Range(300, 1500), required=True, help="Accepts '°C', e.g. '400 °C'."),
        Field("duration_min", "Duration", unit="min", hard=POSITIVE, required=True),
        Field("atmosphere", "Atmosphere", kind="choice", required=True,
              choices=("vacuum", "air", "nitrogen", "argon", "forming_gas")),
        Field("pressure_Pa", "Pressure", unit="Pa", hard=Range(0, 1e8)),
        Field("heating_rate_K_per_min", "Heating rate", unit="K/min",
              hard=Range(0, 1e5, low_open=True)),
    ),
)

SPLIT = Technique(
    code="split", family="preparation", label="Split into fragments", is_destructive=True,
    creates=("fragment",),
    fields=(
        Field("method", "Method", kind="choice", required=True,
              choices=("cleave", "crush", "needle_press", "saw", "scalpel")),
        Field("fragment_count", "Fragments kept", kind="integer", hard=Range(1, 10_000),
              typical=Range(2, 20), required=True),
    ),
)

MOUNTING = Technique(
    code="mounting", family="preparation", label="Mounting",
    fields=(
        Field("mount_kind", "Mount", kind="choice", required=True,
              choices=("sem_stub", "tem_grid", "needle_coupon", "epoxy_mount", "indium_foil",
                       "gold_foil", "glass_fibre")),
        Field("adhesive", "Adhesive", kind="choice",
              choices=("none", "carbon_tape", "carbon_paint", "epoxy", "indium_press",
                       "silver_paint")),
        Field("position", "Position on mount", kind="text", help="Post, hole or quadrant."),
    ),
)

WEIGHING = Technique(
    code="weighing", family="preparation", label="Weighing",
    fields=(
        Field("mass_ug", "Mass", unit="ug", hard=POSITIVE, required=True,
              help="Accepts 'mg' or 'ng'."),
        Field("mass_uncertainty_ug", "Standard uncertainty", unit="ug", hard=Range(0, None)),
    ),
)

TECHNIQUES = (COATING, ION_IRRADIATION, HEATING, SPLIT, MOUNTING, WEIGHING)
