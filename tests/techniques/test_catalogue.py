"""The technique catalogue: consistent specs, unit conversion, refusals and warnings."""

from __future__ import annotations

import time
from collections.abc import Mapping

import pint
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from curation.errors import InvalidInput
from curation.techniques import (
    TECHNIQUES,
    Field,
    Technique,
    ValidationFailed,
    for_family,
    for_instrument,
    get,
    unknown_words,
    ureg,
    validate,
)
from curation.techniques.validation import clean

#: the codes the demo and the station page use (issue 3)
CODES = [
    "xct", "xct-synchrotron", "sem-imaging", "eds", "ebsd", "tkd", "fib-trench", "fib-liftout",
    "fib-lamella-thinning", "fib-needle-sharpening", "fib-cap-deposition", "tem-imaging",
    "tem-diffraction", "stem-eels", "stem-eds", "apt", "coating", "ion-irradiation", "heating",
    "split", "mounting", "weighing",
]

#: the unit a field name's suffix promises (NeXus-style names carry their unit)
SUFFIX_UNITS = {
    "_kV": "kV", "_nA": "nA", "_us": "us", "_s": "s", "_min": "min", "_kHz": "kHz", "_pJ": "pJ",
    "_K": "K", "_um": "um", "_nm": "nm", "_mm": "mm", "_um2": "um**2", "_um3": "um**3",
    "_deg": "degree", "_mrad": "mrad", "_eV": "eV", "_keV": "keV", "_W": "W", "_Pa": "Pa",
    "_ug": "ug", "_percent": "percent", "_e_per_A2": "e/angstrom**2",
    "_e_per_A2_s": "e/angstrom**2/s", "_eV_per_channel": "eV", "_ions_per_cm2": "ion/cm**2",
    "_K_per_min": "K/min",
}

#: an independent pint registry: the reference for unit algebra
REF: pint.UnitRegistry[float] = pint.UnitRegistry(cache_folder=None)

ALL_FIELDS = [(t.code, f) for t in TECHNIQUES.values() for f in t.fields]
FIELD_IDS = [f"{code}.{f.name}" for code, f in ALL_FIELDS]


def sample_value(spec: Field) -> object:
    """A value inside the field's typical (else hard) range, or its first choice."""
    if spec.kind == "choice":
        return spec.choices[0]
    if spec.kind == "text":
        return "a note"
    if spec.kind == "bool":
        return True
    rng = spec.typical or spec.hard
    low, high = rng.low, rng.high
    if low is not None and high is not None:
        value = (low + high) / 2
    elif low is not None:
        value = low + 1
    else:
        value = 1.0 if high is None else high - 1
    return round(value) if spec.kind == "integer" else value


def minimal(technique: Technique) -> dict[str, object]:
    """The required fields, then the conditionally required ones, filled with sample values."""
    raw = {f.name: sample_value(f) for f in technique.fields if f.required}
    for f in technique.fields:
        if f.required_when and raw.get(f.required_when[0]) in f.required_when[1]:
            raw[f.name] = sample_value(f)
    return raw


def problems(code: str, raw: Mapping[str, object]) -> dict[str, list[str]]:
    """Every problem validate() reports, by field."""
    with pytest.raises(ValidationFailed) as caught:
        validate(code, raw)
    return caught.value.by_field


# --- the registry ---------------------------------------------------------------------------


def test_registry_holds_exactly_the_codes_in_use() -> None:
    assert sorted(TECHNIQUES) == sorted(CODES) and len(TECHNIQUES) == len(CODES)


def test_get_unknown_code_names_it_and_the_known_ones() -> None:
    with pytest.raises(InvalidInput) as caught:
        get("fib-liftoff")
    assert caught.value.field == "technique"
    assert "fib-liftoff" in str(caught.value)
    assert all(code in caught.value.allowed for code in CODES)


def test_for_instrument_reads_families_and_codes() -> None:
    codes = [t.code for t in for_instrument("sem, eds ebsd fib")]
    assert codes == ["sem-imaging", "eds", "ebsd", "fib-trench", "fib-liftout",
                     "fib-lamella-thinning", "fib-needle-sharpening", "fib-cap-deposition"]
    assert [t.code for t in for_instrument("weighing coating")] == ["coating", "weighing"]
    assert unknown_words("sem plasma-fib") == ["plasma-fib"]


def test_for_family() -> None:
    assert {t.code for t in for_family("stem")} == {"stem-eels", "stem-eds"}
    assert {t.code for t in for_family("xct")} == {"xct", "xct-synchrotron"}


def test_what_each_step_does_to_the_sample() -> None:
    assert get("fib-liftout").creates == ("lamella", "wedge")
    assert get("fib-needle-sharpening").creates == ("needle",)
    assert get("split").creates == ("fragment",)
    creators = {t.code for t in TECHNIQUES.values() if t.creates_items}
    assert creators == {"fib-liftout", "fib-needle-sharpening", "split"}
    assert all(t.is_destructive for t in TECHNIQUES.values() if t.creates_items)
    assert not get("xct").is_destructive and get("apt").is_destructive
    assert {t.code for t in TECHNIQUES.values() if t.puts_xrays} == {"xct", "xct-synchrotron"}
    assert get("apt").puts_beam is False
    assert all(t.puts_ion_beam for t in for_family("fib"))
    assert all(t.puts_electron_beam for f in ("sem", "eds", "ebsd", "tkd", "tem", "stem")
               for t in for_family(f))


def test_apt_pulse_mode_uses_the_nxapm_vocabulary() -> None:
    # NeXus NXapm: pulse_mode is laser, voltage or laser_and_voltage
    pulse_mode = get("apt").field("pulse_mode")
    assert pulse_mode is not None
    assert pulse_mode.choices == ("laser", "voltage", "laser_and_voltage")


# --- every field of every spec --------------------------------------------------------------


@pytest.mark.parametrize(("code", "spec"), ALL_FIELDS, ids=FIELD_IDS)
def test_typical_range_lies_inside_hard_range(code: str, spec: Field) -> None:
    if spec.typical is None:
        return
    for bound in (spec.typical.low, spec.typical.high):
        if bound is None:
            assert (spec.hard.low if spec.typical.low is None else spec.hard.high) is None
        else:
            assert bound in spec.hard, f"{code}.{spec.name}: typical {bound} outside hard range"


@pytest.mark.parametrize(("code", "spec"), ALL_FIELDS, ids=FIELD_IDS)
def test_field_shape_matches_its_kind(code: str, spec: Field) -> None:
    assert spec.name.isidentifier() and spec.name == spec.name.strip()
    assert bool(spec.choices) == (spec.kind == "choice")
    if spec.kind == "number":
        assert spec.unit is not None, "numbers are stored in a named unit"
    else:
        assert spec.unit is None and (spec.kind == "integer" or spec.typical is None)
    if spec.default is not None:
        assert clean(spec, spec.default) == spec.default
    if spec.required_when:
        other = get(code).field(spec.required_when[0])
        assert other is not None and set(spec.required_when[1]) <= set(other.choices)


@pytest.mark.parametrize(("code", "spec"), [(c, f) for c, f in ALL_FIELDS if f.unit],
                         ids=[i for i, (_, f) in zip(FIELD_IDS, ALL_FIELDS, strict=True) if f.unit])
def test_unit_parses_and_matches_the_name_suffix(code: str, spec: Field) -> None:
    assert spec.unit is not None
    unit = ureg.parse_units(spec.unit)
    suffix = max((s for s in SUFFIX_UNITS if spec.name.endswith(s)), key=len, default=None)
    assert suffix is not None, f"{code}.{spec.name} does not carry its unit in its name"
    assert unit == ureg.parse_units(SUFFIX_UNITS[suffix])


@pytest.mark.parametrize("code", CODES)
def test_minimal_parameters_validate_without_warnings(code: str) -> None:
    result = validate(code, minimal(get(code)))
    assert result.code == code and result.warnings == ()


@pytest.mark.parametrize("code", CODES)
def test_required_fields_are_named_when_missing(code: str) -> None:
    required = {f.name for f in get(code).fields if f.required}
    if required:
        assert set(problems(code, {})) == required


# --- values with units ----------------------------------------------------------------------


#: the same quantity as typed at a station and as pint spells it ("500 pA" → 0.5 nA: issue 3)
TYPED = [
    ("beam_current_nA", "500 pA", "500 pA"),
    ("beam_current_nA", "0.5nA", "0.5 nA"),
    ("beam_current_nA", "5e-10 A", "5e-10 A"),
    ("beam_current_nA", 0.5, "0.5 nA"),
    ("beam_current_nA", "0.5", "0.5 nA"),
    ("accelerating_voltage_kV", "30 kV", "30 kV"),
    ("accelerating_voltage_kV", "500 V", "500 V"),
    ("dwell_time_us", "200 ns", "200 ns"),
    ("dwell_time_us", "2 µs", "2 microsecond"),
    ("exposed_area_um2", "0.01 mm²", "0.01 mm**2"),
    ("exposed_area_um2", "1e6 nm^2", "1e6 nm**2"),
    ("working_distance_mm", "0.5 cm", "0.5 cm"),
    ("electron_dose_e_per_A2", "100 e⁻/nm²", "100 elementary_charge / nm**2"),
    ("electron_dose_e_per_A2", "1.602176634e-3 C/cm2", "1.602176634e-3 C/cm**2"),
]


@pytest.mark.parametrize(("field", "typed", "pint_text"), TYPED)
def test_values_with_units_convert_to_the_field_unit(field: str, typed: object,
                                                     pint_text: str) -> None:
    raw = {**minimal(get("sem-imaging")), field: typed}
    spec = get("sem-imaging").field(field)
    assert spec is not None and spec.unit is not None
    # reference: pint's own conversion in a fresh registry, not our parser
    expected: float = REF.Quantity(pint_text).to(spec.unit).magnitude
    assert validate("sem-imaging", raw).values[field] == pytest.approx(expected, rel=1e-11)


def test_500_pA_is_half_a_nanoampere() -> None:
    # issue 3's own example
    raw = {**minimal(get("sem-imaging")), "beam_current_nA": "500 pA"}
    assert validate("sem-imaging", raw).values["beam_current_nA"] == 0.5


def test_celsius_converts_to_kelvin() -> None:
    raw = {**minimal(get("heating")), "temperature_K": "400 °C"}
    reference = REF.Quantity(400, "degC").to("K").magnitude  # pint
    assert validate("heating", raw).values["temperature_K"] == pytest.approx(reference)


def test_scan_pixels_accept_width_times_height() -> None:
    raw = {**minimal(get("sem-imaging")), "scan_pixels": "1024 x 768"}
    assert validate("sem-imaging", raw).values["scan_pixels"] == 1024 * 768


def test_integer_accepts_exponent_form_but_not_fractions() -> None:
    raw = {**minimal(get("apt")), "pulse_mode": "voltage", "pulse_fraction_percent": 20,
           "ions_collected": "2.4e7"}
    assert validate("apt", raw).values["ions_collected"] == 24_000_000
    assert "ions_collected" in problems("apt", {**raw, "ions_collected": "2.5 million"})
    assert "ions_collected" in problems("apt", {**raw, "ions_collected": 10.5})


def test_choice_is_case_blind_and_canonical() -> None:
    raw = {**minimal(get("apt")), "pulse_mode": "Laser and voltage", "pulse_fraction_percent": 20,
           "laser_wavelength_nm": 355, "laser_pulse_energy_pJ": 30}
    assert validate("apt", raw).values["pulse_mode"] == "laser_and_voltage"


# --- refusals -------------------------------------------------------------------------------


def test_wrong_dimension_names_field_value_and_unit() -> None:
    raw = {**minimal(get("sem-imaging")), "accelerating_voltage_kV": "30 nm"}
    shown = problems("sem-imaging", raw)
    assert list(shown) == ["accelerating_voltage_kV"]
    assert "kV" in shown["accelerating_voltage_kV"][0]
    assert "30 nm" in shown["accelerating_voltage_kV"][0]


def test_angle_is_not_a_ratio() -> None:
    # pint calls both degrees and percent dimensionless; a tilt of "70 %" must still be refused
    raw = {**minimal(get("ebsd")), "sample_tilt_deg": "70 %"}
    assert "sample_tilt_deg" in problems("ebsd", raw)


def test_out_of_hard_range_names_the_range_with_units() -> None:
    raw = {**minimal(get("sem-imaging")), "accelerating_voltage_kV": "80 kV"}
    message = problems("sem-imaging", raw)["accelerating_voltage_kV"][0]
    assert "50 kV" in message


def test_zero_current_is_refused() -> None:
    raw = {**minimal(get("fib-trench")), "beam_current_nA": 0}
    assert "above 0" in problems("fib-trench", raw)["beam_current_nA"][0]


def test_out_of_typical_range_warns_with_the_range() -> None:
    raw = {**minimal(get("sem-imaging")), "working_distance_mm": "45 mm"}
    result = validate("sem-imaging", raw)
    assert [w.field for w in result.warnings] == ["working_distance_mm"]
    assert result.warnings[0].typical == "2–30 mm"  # REFERENCES.md: 2–30 mm (from memory)
    assert "45 mm" in result.warnings[0].message


def test_every_problem_is_listed_at_once() -> None:
    raw = {"accelerating_voltage_kV": "30 nm", "beam_current_nA": "-2 nA", "detector": "camera",
           "scan_pixels": "12.5", "beam_curent_nA": "1", "dwell_time_us": "fast"}
    shown = problems("sem-imaging", raw)
    assert set(shown) == {"accelerating_voltage_kV", "beam_current_nA", "detector", "scan_pixels",
                          "beam_curent_nA", "dwell_time_us"}
    with pytest.raises(ValidationFailed) as caught:
        validate("sem-imaging", raw)
    assert isinstance(caught.value, InvalidInput)
    assert all(name in str(caught.value) for name in shown)


def test_apt_laser_mode_requires_laser_fields_and_voltage_mode_the_pulse_fraction() -> None:
    base = {"pulse_frequency_kHz": 200, "base_temperature_K": 50, "detection_rate_percent": 0.5}
    laser = problems("apt", {**base, "pulse_mode": "laser"})
    assert set(laser) == {"laser_wavelength_nm", "laser_pulse_energy_pJ"}
    assert "pulse_mode" in laser["laser_pulse_energy_pJ"][0]
    assert set(problems("apt", {**base, "pulse_mode": "voltage"})) == {"pulse_fraction_percent"}


def test_ion_cap_needs_a_species_and_electron_cap_does_not() -> None:
    base = {"cap_material": "platinum", "accelerating_voltage_kV": 5, "beam_current_nA": 0.1}
    assert validate("fib-cap-deposition", {**base, "beam": "electron"}).values["beam"] == "electron"
    assert set(problems("fib-cap-deposition", {**base, "beam": "ion"})) == {"ion_species"}


def test_hostile_unit_text_is_refused_quickly() -> None:
    raw = {**minimal(get("sem-imaging")), "beam_current_nA": "1 nA**(10**10**10)"}
    start = time.monotonic()
    assert "beam_current_nA" in problems("sem-imaging", raw)
    assert time.monotonic() - start < 1


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(code=st.sampled_from(CODES), text=st.text(max_size=30) | st.floats() | st.integers())
def test_any_input_is_cleaned_or_refused_with_the_field_named(code: str, text: object) -> None:
    technique = get(code)
    for spec in technique.fields:
        try:
            validate(code, {**minimal(technique), spec.name: text})
        except ValidationFailed as failed:
            assert spec.name in failed.by_field
