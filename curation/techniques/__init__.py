"""The technique catalogue: declarative parameter specs, units, ranges, validation and dose.

Pure code (standard library, pint and curation.errors only): the station page, the API and the
services read it; it reads no database.
"""

from __future__ import annotations

from curation.techniques.catalogue import (
    TECHNIQUES,
    families,
    for_family,
    for_instrument,
    get,
    unknown_words,
)
from curation.techniques.dose import (
    ELEMENTARY_CHARGE_C,
    Dose,
    beam_time,
    dose_for,
    dose_rate_e_per_A2_s,
    electron_dose_e_per_A2,
    ion_fluence_ions_per_cm2,
    scan_time_s,
)
from curation.techniques.spec import Field, Range, Technique
from curation.techniques.units import ureg
from curation.techniques.validation import RangeWarning, Validated, ValidationFailed, validate

__all__ = [
    "ELEMENTARY_CHARGE_C", "TECHNIQUES", "Dose", "Field", "Range", "RangeWarning", "Technique",
    "Validated", "ValidationFailed", "beam_time", "dose_for", "dose_rate_e_per_A2_s",
    "electron_dose_e_per_A2", "families", "for_family", "for_instrument", "get",
    "ion_fluence_ions_per_cm2", "scan_time_s", "unknown_words", "ureg", "validate",
]
