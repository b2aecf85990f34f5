"""Electron dose, dose rate, ion fluence and X-ray time of a step, from its validated parameters.

Electron dose D = I·t / (e·A) (Egerton, Electron Energy-Loss Spectroscopy in the Electron
Microscope); for a scanned beam t = pixels × dwell × frames. Ion fluence = I·t / (q·e·A).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

from curation.techniques.catalogue import get
from curation.techniques.spec import Technique, Value
from curation.techniques.units import ureg

#: the elementary charge in coulombs, exact in the SI since 2019
ELEMENTARY_CHARGE_C = 1.602176634e-19
_E = ureg.Quantity(ELEMENTARY_CHARGE_C, "C")


@dataclass(frozen=True)
class Dose:
    """What a step's beam delivered; None where it does not apply or could not be computed."""

    electron_dose_e_per_A2: float | None = None
    dose_rate_e_per_A2_s: float | None = None
    ion_fluence_ions_per_cm2: float | None = None
    xray_seconds: float | None = None
    #: beam-on time the computation used, seconds
    beam_time_s: float | None = None
    #: True when the dose or fluence is the instrument's own figure, not computed here
    is_reported: bool = False


def scan_time_s(pixels: float, dwell_time_us: float, frames: float = 1) -> float:
    """Beam-on time of a scanned beam: pixels × dwell × frames (flyback not counted)."""
    time = pixels * ureg.Quantity(dwell_time_us, "us") * frames
    return float(time.to("s").magnitude)


def electron_dose_e_per_A2(beam_current_nA: float, time_s: float, area_um2: float) -> float:
    """Electrons per Å²: I·t / (e·A)."""
    charge = ureg.Quantity(beam_current_nA, "nA") * ureg.Quantity(time_s, "s")
    dose = charge / (_E * ureg.Quantity(area_um2, "um**2"))
    return float(dose.to("1/angstrom**2").magnitude)


def dose_rate_e_per_A2_s(beam_current_nA: float, area_um2: float) -> float:
    """Electrons per Å² per second: I / (e·A)."""
    rate = ureg.Quantity(beam_current_nA, "nA") / (_E * ureg.Quantity(area_um2, "um**2"))
    return float(rate.to("1/angstrom**2/s").magnitude)


def ion_fluence_ions_per_cm2(beam_current_nA: float, time_s: float, area_um2: float,
                             charge_state: int = 1) -> float:
    """Ions per cm²: I·t / (q·e·A), since each ion carries q elementary charges."""
    if charge_state < 1:
        raise ValueError(f"charge state must be at least 1, not {charge_state}")
    charge = ureg.Quantity(beam_current_nA, "nA") * ureg.Quantity(time_s, "s")
    fluence = charge / (charge_state * _E * ureg.Quantity(area_um2, "um**2"))
    return float(fluence.to("1/cm**2").magnitude)


def dose_for(technique: str | Technique, params: Mapping[str, Value]) -> Dose | None:
    """The dose of a step from its validated parameters; None when it puts no beam on the sample."""
    spec = technique if isinstance(technique, Technique) else get(technique)
    if not spec.puts_beam:
        return None
    if spec.puts_xrays:
        return Dose(xray_seconds=_xray_seconds(params))
    if _beam(spec, params) == "ion":
        return _ion_dose(params)
    return _electron_dose(params)


def _num(params: Mapping[str, Value], name: str) -> float | None:
    """A numeric parameter, or None when absent."""
    value = params.get(name)
    if value is None or isinstance(value, bool | str):
        return None
    return float(value)


def beam_time(params: Mapping[str, Value]) -> float | None:
    """Beam-on seconds: given directly, else pixels × dwell × frames, else None."""
    direct = _num(params, "exposure_time_s")
    if direct is not None:
        return direct
    pixels, dwell = _num(params, "scan_pixels"), _num(params, "dwell_time_us")
    if pixels is None or dwell is None:
        return None
    return scan_time_s(pixels, dwell, _num(params, "frame_count") or 1)


def _beam(spec: Technique, params: Mapping[str, Value]) -> str:
    """Which beam the current and time describe: the only one, or the step's 'beam' choice."""
    if spec.puts_electron_beam and spec.puts_ion_beam:
        return str(params.get("beam", "ion"))
    return "ion" if spec.puts_ion_beam else "electron"


def _electron_dose(params: Mapping[str, Value]) -> Dose:
    """Reported dose and rate win; otherwise computed from current, time and area."""
    current, area = _num(params, "beam_current_nA"), _num(params, "exposed_area_um2")
    time = beam_time(params)
    reported = _num(params, "electron_dose_e_per_A2")
    rate = _num(params, "dose_rate_e_per_A2_s")
    if rate is None and current is not None and area is not None:
        rate = dose_rate_e_per_A2_s(current, area)
    if rate is None and reported is not None and time:
        rate = reported / time
    computed = None
    if current is not None and time is not None and area is not None:
        computed = electron_dose_e_per_A2(current, time, area)
    dose = reported if reported is not None else computed
    return Dose(electron_dose_e_per_A2=dose, dose_rate_e_per_A2_s=rate, beam_time_s=time,
                is_reported=reported is not None)


def _ion_dose(params: Mapping[str, Value]) -> Dose:
    """Reported fluence wins; otherwise I·t / (q·e·A)."""
    current, area = _num(params, "beam_current_nA"), _num(params, "exposed_area_um2")
    time = beam_time(params)
    reported = _num(params, "ion_fluence_ions_per_cm2")
    charge = int(_num(params, "charge_state") or 1)
    fluence = reported
    if fluence is None and current is not None and time is not None and area is not None:
        fluence = ion_fluence_ions_per_cm2(current, time, area, charge)
    return Dose(ion_fluence_ions_per_cm2=fluence, beam_time_s=time,
                is_reported=reported is not None)


def _xray_seconds(params: Mapping[str, Value]) -> float | None:
    """Total X-ray time: given directly, else projections × exposure per projection."""
    total = _num(params, "scan_time_s")
    if total is not None:
        return total
    count, each = _num(params, "projection_count"), _num(params, "exposure_per_projection_s")
    return count * each if count is not None and each is not None else None
