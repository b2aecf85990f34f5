"""Mineral densities, material classes and the sphere/XCT volume helpers."""

from __future__ import annotations

import math

import pytest

from curation.techniques import densities as d


def test_sphere_masses_match_the_worked_examples() -> None:
    # REFERENCES.md: m = ρπd³/6; 50 µm at 3.4 g/cm³ ≈ 0.22 µg, 100 µm ≈ 1.8 µg (from memory)
    assert d.mass_ug(d.sphere_volume_um3(50), 3.4) == pytest.approx(0.22, abs=0.005)
    assert d.mass_ug(d.sphere_volume_um3(100), 3.4) == pytest.approx(1.8, abs=0.05)


def test_handbook_values_and_their_sources() -> None:
    # Handbook of Mineralogy (Anthony et al.): forsterite 3.275, fayalite 4.392, calcite 2.71,
    # magnetite 5.17-5.18, lizardite 2.55-2.58
    table = d.DENSITIES
    assert table["forsterite"].g_per_cm3 == 3.275 and table["fayalite"].g_per_cm3 == 4.392
    assert table["calcite"].g_per_cm3 == 2.71
    assert table["magnetite"].g_per_cm3 == pytest.approx(5.175)
    assert table["lizardite"].half_range == pytest.approx(0.015)
    assert {v.source for v in table.values()} <= {d.HANDBOOK, d.FROM_MEMORY}
    assert table["saponite"].source == d.FROM_MEMORY  # REFERENCES.md marks it so


def test_olivine_is_interpolated_in_fe_over_fe_plus_mg() -> None:
    # Handbook of Mineralogy end members, linear in Fe/(Fe+Mg): Fo92 = 3.275 + 0.08 × 1.117
    assert d.olivine(92).g_per_cm3 == pytest.approx(3.275 + 0.08 * (4.392 - 3.275))
    assert d.density_for("coarse olivine (Fo92) with a matrix rim").g_per_cm3 == pytest.approx(
        3.36436)
    with pytest.raises(ValueError):
        d.olivine(120)


@pytest.mark.parametrize(("material", "mineral", "klass"), [
    ("serpentine-saponite matrix with magnetite framboids", "lizardite", "hydrous"),
    ("dolomite-bearing matrix", "dolomite", "anhydrous"),
    ("pyrrhotite-rich clast in matrix", "pyrrhotite", "anhydrous"),
    ("saponite matrix with organic-rich nodules", "saponite", "organic"),
    ("polished silicon", None, "anhydrous"),
])
def test_material_words(material: str, mineral: str | None, klass: str) -> None:
    found = d.density_for(material)
    assert (found.mineral if found else None) == mineral
    assert d.material_class(material) == klass


def test_xct_volume_is_voxels_times_voxel_size_cubed() -> None:
    # 0.5 µm voxels: 8 voxels per µm³
    assert d.xct_volume_um3(8_000, 0.5) == pytest.approx(1_000)
    assert d.sphere_volume_um3(2) == pytest.approx(4 / 3 * math.pi)
