"""Budget rules: dose-over-limit, exposure-over-limit, order-violation, mass-not-conserved.

Worked dose example from CODATA: 1 nA for 1 s over 1 µm² = 1e-9 / (e × 1e8 Å²) e⁻/Å²
(scipy.constants, the elementary charge is exact since 2019).
"""

from __future__ import annotations

import pytest
from scipy import constants

from curation.audit import engine, exposure, mass
from curation.audit.findings import WARNING
from curation.services import items, studies
from tests.conftest import hours

#: e⁻/Å² of 1 nA for 1 s over 1 µm² (1 µm² = 1e8 Å²), from CODATA's e
ONE_NA_S_UM2 = 1e-9 / constants.e / 1e8
BEAM = {"accelerating_voltage_kV": 5, "beam_current_nA": 1.0, "exposure_time_s": 1.0,
        "exposed_area_um2": 1.0}


def _study(session, operator, item, **rules):
    s = studies.create_study(session, actor=operator, code=f"S-{item.code}", title="t",
                             rules=rules)
    studies.enrol(session, actor=operator, study=s, item=item)


def _found(session, item, code):
    return [f for f in engine.audit_item(session, item, now=hours(100)) if f.code == code]


def _budget(session, item):
    return exposure.budget(engine.context(session, item).current())


def test_codata_worked_example() -> None:
    # REFERENCES.md: 62.4150907446076 e⁻/Å²; 60 s ≈ 3.7e3 e⁻/Å²
    assert ONE_NA_S_UM2 == pytest.approx(62.4150907446076, rel=1e-12)


def test_cumulative_dose_over_the_study_limit(session, operator, make_item, make_event) -> None:
    item = make_item(material="olivine (Fo92)")
    _study(session, operator, item, max_electron_dose_e_per_A2=100)
    a = make_event(item, 1, details=BEAM)
    assert not _found(session, item, "dose-over-limit")  # 62 e⁻/Å² is under 100
    b = make_event(item, 2, details=BEAM, technique="eds")
    found = _found(session, item, "dose-over-limit")
    assert [f.evidence for f in found] == [(a.id, b.id)]
    spent = _budget(session, item)
    assert spent.electron_e_per_A2 == pytest.approx(2 * ONE_NA_S_UM2, rel=1e-12)
    assert set(spent.electron_by_technique) == {"sem-imaging", "eds"}


def test_stored_dose_wins_and_corrections_replace(session, operator, make_item,
                                                  make_event) -> None:
    from curation.services import events
    item = make_item()
    ev = make_event(item, 1, details=BEAM)
    ev.electron_dose_e_per_A2 = 500.0  # as the station stores it
    session.flush()
    assert _budget(session, item).electron_e_per_A2 == 500.0
    events.correct_event(session, actor=operator, original=ev, reason="field was 10 µm²",
                         details={**BEAM, "exposed_area_um2": 10.0})
    assert _budget(session, item).electron_e_per_A2 == pytest.approx(ONE_NA_S_UM2 / 10)


def test_ancestor_dose_reaches_the_child_only_up_to_the_cut(session, operator, make_item,
                                                             make_event) -> None:
    parent, child = make_item(), make_item(kind="lamella", created_at=hours(3))
    make_event(parent, 1, details=BEAM)
    make_event(parent, 5, details=BEAM)
    items.derive(session, actor=operator, parent=parent, child=child, derived_at=hours(3))
    assert _budget(session, child).electron_e_per_A2 == pytest.approx(ONE_NA_S_UM2)
    assert _budget(session, parent).electron_e_per_A2 == pytest.approx(2 * ONE_NA_S_UM2)


def test_per_acquisition_default_depends_on_material(session, make_item, make_event) -> None:
    # hydrous: ~100 e⁻/Å² per acquisition (REFERENCES.md, from memory); anhydrous: ten times
    strong = {**BEAM, "beam_current_nA": 2.0}  # 125 e⁻/Å²
    wet, dry = make_item(material="lizardite chip"), make_item(material="forsterite")
    make_event(wet, 1, details=strong)
    make_event(dry, 1, details=strong)
    found = _found(session, wet, "dose-over-limit")
    assert [f.severity for f in found] == [WARNING]
    assert not _found(session, dry, "dose-over-limit")


def test_overlapping_air_exposures_count_once(session, operator, make_item, make_event) -> None:
    item, box = make_item(), make_item(kind="container")
    _study(session, operator, item, max_air_minutes=100)
    items.place(session, actor=operator, item=item, container=box, placed_at=hours(0))
    a = make_event(item, 1, kind="handling", environment="air", ended_at=hours(2))
    b = make_event(box, 1.5, kind="handling", environment="air", ended_at=hours(3))
    make_event(item, 4, kind="handling", environment="n2-glovebox", ended_at=hours(9))
    assert _budget(session, item).air_minutes == pytest.approx(120)
    found = _found(session, item, "exposure-over-limit")
    assert [f.evidence for f in found] == [(a.id, b.id)]


def test_xray_and_heating_limits(session, operator, make_item, make_event) -> None:
    item = make_item()
    _study(session, operator, item, max_xray_s=1000, max_temperature_K=400)
    make_event(item, 1, technique="xct", details={"projection_count": 100,
                                                 "exposure_per_projection_s": 5})
    assert not _found(session, item, "exposure-over-limit")
    make_event(item, 2, technique="heating", details={"temperature_K": 573.15})
    make_event(item, 3, technique="xct", details={"scan_time_s": 600})
    messages = sorted(f.message for f in _found(session, item, "exposure-over-limit"))
    assert len(messages) == 2 and "X-ray time 1100 s" in messages[0] and "573.1 K" in messages[1]


def test_technique_order(session, operator, make_item, make_event) -> None:
    item = make_item()
    _study(session, operator, item, technique_order=["xct", "sem-imaging", "apt"])
    make_event(item, 1, technique="xct")
    make_event(item, 2, technique="sem-imaging", details=BEAM)
    assert not _found(session, item, "order-violation")
    late = make_event(item, 3, technique="xct")
    assert [f.evidence[-1] for f in _found(session, item, "order-violation")] == [late.id]


def test_dose_coat_and_gallium_before_apt(session, operator, make_item, make_event) -> None:
    item = make_item()
    _study(session, operator, item, max_electron_dose_before_apt_e_per_A2=50,
           carbon_analysis_techniques=["apt"], flag_ga_before_apt=True)
    beam = make_event(item, 1, details=BEAM)
    coat = make_event(item, 2, technique="coating",
                      details={"coating_material": "carbon", "thickness_nm": 5})
    ga = make_event(item, 3, technique="fib-trench", details={"ion_species": "Ga"})
    run = make_event(item, 4, technique="apt")
    found = {(f.severity, f.evidence) for f in _found(session, item, "order-violation")}
    assert found == {("error", (beam.id, run.id)), ("error", (coat.id, run.id)),
                     ("warning", (ga.id, run.id))}


def test_no_order_rules_no_findings(session, make_item, make_event) -> None:
    item = make_item()
    make_event(item, 1, technique="coating", details={"coating_material": "carbon"})
    make_event(item, 2, technique="apt")
    assert not _found(session, item, "order-violation")


def _family(session, operator, make_item, parent_mass, child_masses):
    parent = make_item(mass_ug=parent_mass, mass_uncertainty_ug=0.02, mass_method="weighed")
    for n, m in enumerate(child_masses):
        child = make_item(kind="fragment", created_at=hours(1), mass_ug=m,
                          mass_uncertainty_ug=0.01, mass_method="weighed")
        items.derive(session, actor=operator, parent=parent, child=child,
                     derived_at=hours(1 + n / 10))
    return parent


def test_children_heavier_than_the_parent(session, operator, make_item) -> None:
    parent = _family(session, operator, make_item, 1.0, [0.7, 0.5])
    assert len(_found(session, parent, "mass-not-conserved")) == 1
    fine = _family(session, operator, make_item, 1.0, [0.5, 0.3])
    assert not _found(session, fine, "mass-not-conserved")


def test_remaining_weighed_after_the_cut(session, operator, make_item, make_event) -> None:
    parent = _family(session, operator, make_item, 1.0, [0.3])
    weighing = make_event(parent, 2, technique="weighing",
                          details={"mass_ug": 0.5, "mass_uncertainty_ug": 0.01})
    found = _found(session, parent, "mass-not-conserved")
    assert [f.evidence for f in found] == [(weighing.id,)]
    ok = _family(session, operator, make_item, 1.0, [0.3])
    make_event(ok, 2, technique="weighing", details={"mass_ug": 0.69, "mass_uncertainty_ug": 0.01})
    assert not _found(session, ok, "mass-not-conserved")


def test_mass_from_xct_voxels_and_handbook_density(session, make_item, make_event) -> None:
    # Handbook of Mineralogy: forsterite 3.275 g/cm³; 523 599 voxels of 0.5 µm ≈ a 50 µm sphere
    item = make_item(material="forsterite")
    make_event(item, 1, technique="xct", details={"voxel_size_um": 0.5, "voxel_count": 523_599})
    b = mass.mass_budget(item, [], engine.context(session, item).own())
    assert b.initial.ug == pytest.approx(523_599 * 0.125 * 3.275e-6)
    assert b.initial.ug == pytest.approx(3.275 * 3.14159265 * 50**3 / 6 * 1e-6, rel=1e-5)


def test_removed_volume_beyond_the_child_is_milled(session, operator, make_item) -> None:
    parent = make_item(material="calcite", volume_um3=65_000, volume_method="xct")
    child = make_item(kind="lamella", created_at=hours(1), volume_um3=200)
    items.derive(session, actor=operator, parent=parent, child=child, derived_at=hours(1),
                 removed_volume_um3=7_400)
    ctx = engine.context(session, parent)
    b = mass.mass_budget(parent, ctx.children, ctx.own())
    # Handbook of Mineralogy: calcite 2.71 g/cm³; µg = µm³ × ρ × 1e-6
    assert b.milled.ug == pytest.approx(7_200 * 2.71e-6)
    assert b.extracted.ug == pytest.approx(200 * 2.71e-6)
    assert b.remaining.ug == pytest.approx((65_000 - 7_400) * 2.71e-6)
